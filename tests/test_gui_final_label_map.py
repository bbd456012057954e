"""Every run's final label as a plain dict, read from the label table's columns whole, never cell by cell.

Found at 10,000 runs with the map in front: the map read the label table's text columns one cell at a time
(two pandas calls per cell, 20,000 per read) and did so twice in the turn that shows a new map, which then took
83 ms under a profiler and made a 138 ms freeze of the window at the end of an open from the cache.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from pandas.core.arrays.base import ExtensionArray

from basinmark.gui.label_table import final_label_map
from basinmark.gui.map_data import NO_LABEL


def _table(n: int, dtype) -> pd.DataFrame:
    runs = [f"run-{i:05d}" for i in range(n)]
    finals = [("amber", "teal", None, "", "recrossing")[i % 5] for i in range(n)]
    return pd.DataFrame({"run": pd.array(runs, dtype=dtype), "final_label": pd.array(finals, dtype=dtype)})


@pytest.fixture
def no_cell_reads(monkeypatch):
    """Fails a test that iterates a pandas extension array (the text columns' type) element by element."""
    def refuse(self):
        raise AssertionError("a label column was read one cell at a time")

    monkeypatch.setattr(ExtensionArray, "__iter__", refuse)


@pytest.mark.parametrize("dtype", ["string", "str", object])
def test_final_labels_with_a_stand_in_for_blanks(dtype):
    got = final_label_map(_table(10, dtype), blank=NO_LABEL)
    want = {f"run-{i:05d}": ("amber", "teal", NO_LABEL, NO_LABEL, "recrossing")[i % 5] for i in range(10)}
    assert got == want
    assert all(type(k) is str and type(v) is str for k, v in got.items())


@pytest.mark.parametrize("dtype", ["string", "str", object])
def test_runs_without_a_final_label_left_out(dtype):
    got = final_label_map(_table(10, dtype))
    assert got == {f"run-{i:05d}": ("amber", "teal", None, None, "recrossing")[i % 5]
                   for i in range(10) if i % 5 not in (2, 3)}


def test_no_table_no_labels():
    assert final_label_map(None) == {}
    assert final_label_map(_table(0, "string"), blank=NO_LABEL) == {}


@pytest.mark.parametrize("dtype", ["string", "str"])
def test_columns_read_whole(dtype, no_cell_reads):
    got = final_label_map(_table(3000, dtype), blank=NO_LABEL)
    assert len(got) == 3000


def test_map_panel_reads_the_columns_whole(qtbot, tmp_path, no_cell_reads):
    from types import SimpleNamespace

    from basinmark.gui.map_view import MapPanel

    table = _table(3000, "string")
    fake = SimpleNamespace(labels=table)
    got = MapPanel.final_labels(SimpleNamespace(state=fake))
    assert got == final_label_map(table, blank=NO_LABEL) and len(got) == 3000


def test_origins_view_reads_the_columns_whole(no_cell_reads):
    from types import SimpleNamespace

    from basinmark.gui.origins_view import OriginsPanel

    table = _table(3000, "string")
    got = OriginsPanel.labels(SimpleNamespace(state=SimpleNamespace(labels=table)))
    assert got == final_label_map(table) and len(got) == 1800


def test_nan_text_is_no_label():
    table = pd.DataFrame({"run": ["a", "b"], "final_label": [np.nan, "teal"]})
    assert final_label_map(table, blank=NO_LABEL) == {"a": NO_LABEL, "b": "teal"}
