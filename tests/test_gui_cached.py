"""The window on a set reopened from the cache, whose positions are read-only views of one memory-mapped
array: playing, scrubbing, picking atoms and exporting must never write into them."""

from __future__ import annotations

import numpy as np
import pytest
from PySide6.QtCore import QSettings

from basinmark.core.geometry import distance
from basinmark.core.sets import open_set
from basinmark.gui.main_window import MainWindow

from gui_fixtures import make_toy_set

pytestmark = pytest.mark.gui


def test_cached_set_is_read_only_and_fully_usable(qtbot, tmp_path):
    root = make_toy_set(tmp_path / "toyset", ["left", "right", "recrossing", "left"])
    open_set(root)  # fills the cache
    w = MainWindow(QSettings(str(tmp_path / "settings.ini"), QSettings.Format.IniFormat))
    qtbot.addWidget(w)
    w.resize(1200, 800)
    w.show()
    qtbot.waitExposed(w)
    with qtbot.waitSignal(w.set_loaded, timeout=20000):
        w.open_set(root)  # from the cache this time
    traj = w.state.traj
    assert not traj.positions.flags.writeable  # a view of the cached array
    w.state.set_frame(traj.n_frames - 1)
    w.traces.set_time(float(traj.times[3]))
    assert w.molecule.render_image(300, 200).width() == 300
    xy, _ = w.molecule.project()
    w.molecule.click_at(*xy[0])
    w.molecule.click_at(*xy[1])
    assert (1, 2) in w.state.user_monitors
    # the run's data are unchanged by all of that (same values as a fresh parse without the cache)
    fresh = open_set(root, use_cache=False)[traj.run_id]
    np.testing.assert_array_equal(traj.positions, fresh.positions)
    assert distance(traj.positions, 0, 1).shape == (traj.n_frames,)
    w.close()
