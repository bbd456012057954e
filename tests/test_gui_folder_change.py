"""The window's loader says which runs were added or removed since the set was last opened from its cache."""

from __future__ import annotations

import shutil

from basinmark.core.quick_open import full_check
from basinmark.core.sets import open_set
from basinmark.gui.loader import SetLoader

from gui_fixtures import make_toy_set


def test_the_loader_names_runs_added_since_the_set_was_cached(tmp_path, qtbot):
    root = make_toy_set(tmp_path / "toyset", ["left", "right", "unfinished"])
    open_set(root)
    assert full_check(root).recorded
    for half in ("bwd", "fwd"):
        shutil.copy(root / f"toy-001.{half}.xyz", root / f"toy-007.{half}.xyz")
    results = []
    loader = SetLoader(root)
    loader.done.connect(results.append)
    loader.run()  # the worker's work, here in the test's thread
    (out,) = results
    assert out["quick"] is None and not out["error"]
    assert "toy-007" in out["tset"].run_ids
    assert any("1 run added (toy-007)" in w for w in out["tset"].warnings)
