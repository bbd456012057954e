"""Numbers at the cursor: the readout beside the traces, legend toggles, the drift panel, measures written on the
molecule, and Export Run Data (CSV)."""

from __future__ import annotations

import csv

import numpy as np
import pytest
from ase import Atoms
from PySide6.QtCore import QSettings

from basinmark.core.units import energy_factor
from basinmark.gui.exports import export_run_data
from basinmark.gui.main_window import MainWindow

from gui_fixtures import make_toy_set

pytestmark = pytest.mark.gui

OUTCOMES = ["left", "right", "recrossing"]


@pytest.fixture
def win(qtbot, tmp_path):
    root = make_toy_set(tmp_path / "toyset", OUTCOMES, drift_runs=[0])
    w = MainWindow(QSettings(str(tmp_path / "s.ini"), QSettings.Format.IniFormat))
    qtbot.addWidget(w)
    w.show()
    qtbot.waitExposed(w)
    with qtbot.waitSignal(w.set_loaded, timeout=20000):
        w.open_set(root, use_cache=False)
    w.state.set_run("toy-001")
    yield w
    w.close()


def _atoms(traj, frame: int) -> Atoms:
    return Atoms(numbers=traj.numbers, positions=traj.positions[frame])


def test_readout_equals_core_monitors_at_the_current_frame(win, qtbot):
    st = win.state
    st.add_monitor((2, 1, 3))          # an added angle, checked against ase
    frame = 57
    st.set_frame(frame)
    traj, result = st.traj, st.run_result()
    assert win.traces.frame_index() == frame
    got = win.traces.readout_values()
    for name in ("d_left", "d_right"):
        value, unit = got[name]
        assert unit == "Å" and value == pytest.approx(float(result.monitors[name][frame]), abs=1e-12)
    # the core's distance against ase's Atoms.get_distance (a reference library, not ours)
    assert got["d_left"][0] == pytest.approx(_atoms(traj, frame).get_distance(0, 1), abs=1e-9)
    angle, unit = got["∠(2-1-3)"]
    assert unit == "°" and angle == pytest.approx(_atoms(traj, frame).get_angle(1, 0, 2), abs=1e-6)
    scale = 1.0 / energy_factor("kcal/mol")
    i0 = traj.ts_index
    for name, key in (("E_pot", "potential"), ("E_kin", "kinetic"), ("E_total", "total")):
        value, unit = got[name]
        assert unit == "kcal/mol"
        assert value == pytest.approx((traj.energies[key][frame] - traj.energies[key][i0]) * scale, abs=1e-9)
    text = win.traces.readout.text()
    assert f"frame {frame + 1}" in text and f"d_left = {got['d_left'][0]:.3f}&nbsp;Å" in text
    assert "ΔE_total = " in text and "E − E(t=0)" in text and win.traces.readout.isVisibleTo(win)
    # moving the cursor moves the readout
    st.set_frame(10)
    assert win.traces.readout_values()["d_left"][0] == pytest.approx(float(result.monitors["d_left"][10]))


def test_legend_entry_toggles_its_curve(win):
    tr = win.traces
    assert tr.curves["d_right"].isVisible()
    assert 'href="toggle:d_right"' in tr.legend.text()
    tr.legend.linkActivated.emit("toggle:d_right")
    assert not tr.curves["d_right"].isVisible() and tr.curves["d_left"].isVisible()
    assert "<s>d_right</s>" in tr.legend.text() and "d_right" not in tr.readout_values()
    win.state.set_run("toy-002")       # stays hidden on the next run
    assert not tr.curves["d_right"].isVisible()
    tr.legend.linkActivated.emit("toggle:d_right")
    assert tr.curves["d_right"].isVisible()
    # the total energy's entry also switches its drift curve
    tr.legend.linkActivated.emit("toggle:E_total")
    assert not tr.curves["E_total"].isVisible() and not tr.drift_curve.isVisible()


def test_drift_axis_shows_total_minus_its_t0_value(win):
    tr = win.traces
    traj = win.state.traj
    scale = 1.0 / energy_factor("kcal/mol")
    total = traj.energies["potential"] + traj.energies["kinetic"]
    want = (total - total[traj.ts_index]) * scale
    x, y = tr.drift_curve.getData()
    np.testing.assert_allclose(x, traj.times)
    np.testing.assert_allclose(y, want, atol=1e-9)
    # the low panel's title is short ("drift", unit); what it is says the axis' tooltip
    axis = tr.p_drift.getAxis("left")
    assert tr.p_drift.isVisible() and "drift" in axis.labelText and "kcal/mol" in axis.labelText
    assert "E_total − E_total(t=0)" in axis.toolTip()
    # its own scale: the few kcal/mol of drift fill the panel, whatever the kinetic/potential swings
    lo, hi = tr.p_drift.viewRange()[1]
    assert hi - lo < 3 * (want.max() - want.min()) and want.max() - want.min() > 1.0


def test_added_measures_are_written_on_the_molecule(win):
    st = win.state
    st.add_monitor((1, 2))
    st.add_monitor((2, 1, 3))
    st.set_frame(30)
    traj = st.traj
    labels = win.molecule.measure_labels()
    texts = [t for t, _v, _at in labels]
    ref = _atoms(traj, 30)
    assert texts == [f"{ref.get_distance(0, 1):.2f} Å", f"{ref.get_angle(1, 0, 2):.1f}°"]
    img = win.molecule.render_image(300, 300)     # paints without error, labels included
    assert not img.isNull()
    # picked atoms (Shift keeps picking) show their value before any trace is added
    win.molecule.set_picks([1, 3])
    assert win.molecule.measure_labels()[-1][0] == f"{ref.get_distance(0, 2):.2f} Å"


def test_export_run_data_csv(win, tmp_path):
    st = win.state
    st.add_monitor((2, 1, 3))
    out = export_run_data(st, tmp_path / "run.csv")
    rows = list(csv.DictReader(out.open(encoding="utf-8")))
    traj, result, rules = st.traj, st.run_result(), st.rules
    assert len(rows) == traj.n_frames
    assert list(rows[0]) == ["time [fs]", "frame", "d_left [angstrom]", "d_right [angstrom]", "∠(2-1-3) [deg]",
                             "basin", "E_pot [kcal/mol]", "E_kin [kcal/mol]", "E_total [kcal/mol]",
                             "E_total drift [kcal/mol]"]
    k = 70
    assert float(rows[k]["time [fs]"]) == pytest.approx(traj.times[k])
    assert float(rows[k]["d_left [angstrom]"]) == pytest.approx(result.monitors["d_left"][k], rel=1e-9)
    track = np.asarray(result.basin_track)
    names = rules.basin_names
    assert [r["basin"] for r in rows] == [names[b] if b >= 0 else "" for b in track]
    total = traj.energies["total"]
    assert float(rows[k]["E_total drift [kcal/mol]"]) == pytest.approx(
        (total[k] - total[traj.ts_index]) / energy_factor("kcal/mol"), rel=1e-8)
    assert "export_menu" not in win.__dict__ or any("Run Data" in a.text() for a in win.export_menu.actions())
