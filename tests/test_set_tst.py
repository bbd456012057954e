"""A set's own TST estimate ([tst] in basinmark-set.toml) reaches the summary, headless and in the window."""

from __future__ import annotations

import shutil
from pathlib import Path

import pytest
from PySide6.QtCore import QSettings

from basinmark.cli import main
from basinmark.core import stats
from basinmark.core.errors import SetError
from basinmark.core.manifest import load_layout
from basinmark.core.units import convert_energy

SAMPLE = Path(__file__).resolve().parents[1] / "sample_sets" / "ringfork"


def test_manifest_tst_is_read_and_checked(tmp_path):
    tst = load_layout(SAMPLE).tst
    assert {k: tst[k] for k in ("kind", "major", "minor", "ddg", "unit", "temperature", "source")} == {
        "kind": "pair", "major": "alpha", "minor": "beta", "ddg": 0.3, "unit": "kcal/mol", "temperature": 298.15,
        "source": "invented for the demo scenario; see README.md"}
    (tmp_path / "basinmark-set.toml").write_text('[tst]\nddg = "a lot"\n')
    with pytest.raises(SetError, match=r"basinmark-set.toml, line 2: \[tst\]"):
        load_layout(tmp_path)
    (tmp_path / "basinmark-set.toml").write_text('[tst]\nmajor = "a"\nminor = "b"\nddg = 1.0\ntemperature = -5\n')
    with pytest.raises(SetError, match="positive number of kelvin"):
        load_layout(tmp_path)


def test_summary_uses_the_set_estimate_unless_told_otherwise(tmp_path, capsys):
    root = tmp_path / "ringfork"
    shutil.copytree(SAMPLE, root, ignore=shutil.ignore_patterns(".basinmark-cache", "basinmark-labels.jsonl*"))
    expected = stats.tst_ratio(0.3, "kcal/mol", 298.15)  # exp(ΔΔG‡/RT), checked against published values in test_stats
    assert main(["summary", str(root), "--no-cache"]) == 0
    out = capsys.readouterr().out
    assert f"predicts {expected:.2f}" in out and "from the set's basinmark-set.toml" in out
    # in kJ/mol the same energy is shown converted (1 cal = 4.184 J)
    assert main(["summary", str(root), "--unit", "kJ/mol", "--format", "json"]) == 0
    assert main(["summary", str(root), "--no-tst"]) == 0
    assert "predicts" not in capsys.readouterr().out
    assert main(["summary", str(root), "--ddg", "alpha", "beta", "1.364"]) == 0  # an explicit value wins
    assert "predicts 10.00" in capsys.readouterr().out  # 9.996 at 298.15 K (common practice, no source)


@pytest.mark.gui
def test_window_summary_starts_with_the_set_estimate(qtbot, tmp_path):
    from basinmark.gui.main_window import MainWindow
    from basinmark.gui.summary_view import install_summary_dock

    root = tmp_path / "ringfork"
    shutil.copytree(SAMPLE, root, ignore=shutil.ignore_patterns(".basinmark-cache", "basinmark-labels.jsonl*"))
    (root / "basinmark-set.toml").write_text('[tst]\nmajor = "alpha"\nminor = "beta"\nddg = 1.2552\nunit = "kJ/mol"\n'
                                             'temperature = 310\n')
    w = MainWindow(QSettings(str(tmp_path / "settings.ini"), QSettings.Format.IniFormat))
    qtbot.addWidget(w)
    install_summary_dock(w)
    with qtbot.waitSignal(w.set_loaded, timeout=30000):
        w.open_set(root, use_cache=False)
    panel = w.summary_panel
    assert panel.tst_box.isChecked()
    unit = panel.unit.currentText()
    assert panel.ddg.value() == pytest.approx(float(convert_energy(1.2552, "kJ/mol", unit)), abs=1e-3)
    assert panel.temperature.value() == pytest.approx(310)
    w.close()


@pytest.mark.gui
def test_window_keeps_the_named_pair_when_the_ratio_is_turned_round(qtbot, tmp_path):
    from basinmark.gui.main_window import MainWindow
    from basinmark.gui.summary_view import install_summary_dock

    root = tmp_path / "ringfork"
    shutil.copytree(SAMPLE, root, ignore=shutil.ignore_patterns(".basinmark-cache", "basinmark-labels.jsonl*"))
    (root / "basinmark-set.toml").write_text('[tst]\nmajor = "alpha"\nminor = "beta"\nddg = 0.5\n')
    w = MainWindow(QSettings(str(tmp_path / "settings.ini"), QSettings.Format.IniFormat))
    qtbot.addWidget(w)
    install_summary_dock(w)
    w.docks["summary"].show()
    with qtbot.waitSignal(w.set_loaded, timeout=30000):
        w.open_set(root, use_cache=False)
    panel = w.summary_panel
    panel.refresh(force=True)
    assert (panel.major_combo.currentData(), panel.minor_combo.currentData()) == ("alpha", "beta")
    panel.set_pair("beta", "alpha")
    panel.refresh(force=True)
    assert panel.summary.tst_ratio == pytest.approx(1 / stats.tst_ratio(0.5), rel=1e-12)  # 0.43, not 2.33
    assert "predicts 0.43" in panel.lines.text()
    # the same product on both sides of the ΔΔG‡: the comparison is left out with the reason, the rest stays
    panel.set_tst(0.5, "kcal/mol", 298.15, "alpha", "alpha")
    panel.refresh(force=True)
    assert panel.summary is not None and panel.summary.tst_ratio is None
    assert "TST comparison left out" in panel.warnings.text() and "two different products" in panel.warnings.text()
    # an old manifest without names: no comparison, and the panel says how to name the pair
    (root / "basinmark-set.toml").write_text('[tst]\nddg = 0.5\n')
    with qtbot.waitSignal(w.set_loaded, timeout=30000):
        w.open_set(root, use_cache=False)
    panel.refresh(force=True)
    assert not panel.tst_box.isChecked() and panel.summary.tst_ratio is None
    assert 'major = "…" and minor = "…"' in panel.warnings.text()
    w.close()
