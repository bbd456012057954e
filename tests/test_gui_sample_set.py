"""The window on the bundled sample set: the table and counts equal the core classification."""

from __future__ import annotations

import shutil

import pytest
from PySide6.QtCore import QSettings

from basinmark.core.classify import classify_set
from basinmark.core.rules import load_rules
from basinmark.core.sets import open_set
from basinmark.gui.app import bundled_sample_set
from basinmark.gui.main_window import MainWindow
from basinmark.gui.run_table import COLUMNS

pytestmark = pytest.mark.gui

SAMPLE = bundled_sample_set()


@pytest.mark.skipif(not SAMPLE.is_dir(), reason="the bundled sample set is not in this checkout")
def test_sample_set_table_and_counts_equal_core(qtbot, tmp_path):
    work = tmp_path / "ringfork"  # a copy: the window writes a journal and a cache beside the runs
    shutil.copytree(SAMPLE, work, ignore=shutil.ignore_patterns(".basinmark-cache", "basinmark-labels.*"))
    tset = open_set(work, use_cache=False)
    core = classify_set(tset, load_rules(work / "basins.toml", n_atoms=tset.n_atoms))
    win = MainWindow(QSettings(str(tmp_path / "settings.ini"), QSettings.Format.IniFormat))
    qtbot.addWidget(win)
    win.show()
    with qtbot.waitSignal(win.set_loaded, timeout=60000):
        win.open_set(work)
    assert win.run_table.model.rowCount() == len(core) == len(tset)
    shown = {k: v for k, v in win.run_table.outcome_counts().items() if v}
    assert shown == core["outcome"].value_counts().to_dict()
    table = win.state.labels.set_index("run")
    for row in core.itertuples():
        assert table.loc[row.run, "auto_label"] == row.outcome
        assert table.loc[row.run, "flags"] == row.flags
    assert win.state.run_id == tset.run_ids[0]
    assert win.failure_dialog is None  # every sample file loads
    # Go to Commit goes to the product-side commit, at whichever end the product is
    for end in ("backward", "forward"):
        hit = core[core["product_end"] == end]
        if hit.empty:
            continue
        row = hit.iloc[0]
        win.state.set_run(row["run"])
        win.jump_commit()
        traj = win.state.traj
        sign = -1.0 if end == "backward" else 1.0
        assert traj.times[win.state.frame] == pytest.approx(sign * row["product_final_entry_fs"])
        assert win.traces.marks["commit"].value() == pytest.approx(sign * row["product_final_entry_fs"])
        shown = win.run_table.model.data(win.run_table.model.index(
            win.run_table.model.row_of(row["run"]), [c for c, _ in COLUMNS].index("product_final_entry_fs")))
        assert shown == f"{sign * row['product_final_entry_fs']:.1f}"
    win.close()
