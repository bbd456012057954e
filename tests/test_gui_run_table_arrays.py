"""The run table's model and proxy on arrays: sorting and filtering against pandas, one signal per change,
and the table filling (with the count so far) while a set is still loading."""

from __future__ import annotations

import threading
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from PySide6.QtCore import QSettings, Qt

from basinmark.gui.label_table import LABEL_COLUMNS
from basinmark.gui.run_table import COLUMNS, FILTERS, RunFilterProxy, RunTableModel, flag_words, row_matches

from gui_fixtures import make_toy_set

pytestmark = pytest.mark.gui

LABELS = ["left", "right", "recrossing", "unfinished", "ambiguous", ""]
FLAGS = ["", "", "late_commit", "several_visits;late_commit", "energy_drift"]


def random_table(rng: np.random.Generator, n: int) -> pd.DataFrame:
    """A labels table with many ties and missing values (what sorting gets wrong first)."""
    auto = rng.choice(LABELS, n)
    hand = np.where(rng.random(n) < 0.4, rng.choice(LABELS[:3] + [""], n), "")
    commit = np.where(rng.random(n) < 0.3, np.nan, np.round(rng.uniform(0, 50, n), 0))
    return pd.DataFrame({
        "run": [f"r-{i:04d}" for i in rng.permutation(n)],
        "auto_label": auto,
        "hand_label": hand,
        "final_label": np.where(hand != "", hand, auto),
        "product_end": rng.choice(["forward", "backward", ""], n),
        "product_final_entry_fs": commit,
        "product_first_arrival_fs": commit,
        "flags": rng.choice(FLAGS, n),
        "labeler": np.where(hand != "", rng.choice(["ana", "bo"], n), ""),
        "reason": "",
        "data_changed": rng.random(n) < 0.2,
    }, columns=LABEL_COLUMNS)


def pandas_filter(df: pd.DataFrame, mode: str) -> pd.Series:
    """The quick filters written again with pandas alone (the reference the proxy is held to)."""
    hand, auto, flags = df["hand_label"], df["auto_label"], df["flags"]
    return {
        "all": pd.Series(True, index=df.index),
        "look": (hand == "") & ((flags != "") | auto.isin(["recrossing", "unfinished", "ambiguous"])),
        "flagged": flags != "",
        "unlabeled": hand == "",
        "disagree": (hand != "") & (hand != auto),
        "changed": df["data_changed"].astype(bool),
    }[mode]


def pandas_order(df: pd.DataFrame, column: int, ascending: bool) -> list[str]:
    """Run ids in the order a stable pandas sort gives (ties keep the table's order either way)."""
    key = COLUMNS[column][0]
    d = df.reset_index(drop=True).assign(_pos=lambda x: np.arange(len(x)))
    if key == "run":
        s = d["_pos"]
    elif key == "product_final_entry_fs":
        s = d[key].fillna(np.inf)
    elif key == "data_changed":
        s = d[key].astype(int)
    elif key == "flags":
        s = d[key].map(flag_words)
    else:
        s = d[key].astype(str)
    # descending with ties in table order: sort by (key descending, position ascending)
    d = d.assign(_k=s)
    d = d.sort_values(["_k", "_pos"], ascending=[ascending, True], kind="stable")
    return d["run"].tolist()


@pytest.fixture
def model_proxy(qtbot):
    from PySide6.QtWidgets import QWidget

    holder = QWidget()
    qtbot.addWidget(holder)
    model = RunTableModel(holder)
    proxy = RunFilterProxy(holder)
    proxy.setSourceModel(model)
    yield model, proxy
    holder.deleteLater()


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_sort_and_filter_equal_a_pandas_reference(model_proxy, seed):
    model, proxy = model_proxy
    rng = np.random.default_rng(seed)
    df = random_table(rng, 300)
    model.set_table(df)
    for mode, _text, _tip in FILTERS:
        proxy.set_mode(mode)
        want_rows = df[pandas_filter(df, mode)]
        # the vectorised filter keeps exactly the rows the per-row rules keep
        assert sorted(proxy.visible_runs()) == sorted(want_rows["run"])
        assert sorted(proxy.visible_runs()) == sorted(r["run"] for r in df.to_dict("records") if row_matches(r, mode))
        for column in range(len(COLUMNS)):
            for order in (Qt.SortOrder.AscendingOrder, Qt.SortOrder.DescendingOrder):
                proxy.sort(column, order)
                assert proxy.visible_runs() == pandas_order(want_rows, column, order == Qt.SortOrder.AscendingOrder), \
                    (mode, COLUMNS[column][0], order)
                # what the view shows in the first column is the run of that row
                if proxy.rowCount():
                    assert proxy.index(0, 0).data() == proxy.visible_runs()[0]


def test_only_given_runs_and_pinned_run(model_proxy):
    model, proxy = model_proxy
    df = random_table(np.random.default_rng(5), 50)
    model.set_table(df)
    some = frozenset(df["run"].iloc[[3, 7, 11]])
    proxy.set_mode("all", some)
    assert sorted(proxy.visible_runs()) == sorted(some)
    proxy.set_mode("unlabeled")
    labeled = df.loc[df["hand_label"] != "", "run"].iloc[0]
    assert labeled not in proxy.visible_runs()
    proxy.pinned = labeled
    proxy.set_pinned("")  # unpinning a run that was listed only for its pin runs the filter again
    proxy.pinned = ""
    proxy._reset()
    proxy.set_pinned(labeled)
    proxy._reset()  # a relabel (reset) keeps the pinned run listed, in italics
    assert labeled in proxy.visible_runs()
    r = proxy.mapFromSource(model.index(model.row_of(labeled), 0))
    assert r.isValid() and r.data(Qt.ItemDataRole.FontRole).italic()
    assert "no longer matches" in r.data(Qt.ItemDataRole.ToolTipRole)


class CountingId(str):
    """A run id that counts how often it is compared; past ``budget`` comparisons in all it fails the test at once."""

    compared = 0
    budget = 0

    def __eq__(self, other):
        CountingId.compared += 1
        if CountingId.compared > CountingId.budget:
            raise AssertionError(f"over {CountingId.budget} run-id comparisons: the filter is not linear")
        return str.__eq__(self, other)

    def __ne__(self, other):
        return not self.__eq__(other)

    def __lt__(self, other):
        return self.__eq__(other) or str.__lt__(self, other)

    __hash__ = str.__hash__


def test_showing_only_given_runs_is_linear(model_proxy):
    """A search matching most of 20,000 runs lists them with a few comparisons per run (at 10,000 runs each
    keystroke of such a search froze the window for 1.3 s: every given id compared with every listed one)."""
    model, proxy = model_proxy
    n = 20_000
    df = random_table(np.random.default_rng(9), n)
    model.set_table(df)
    given = [CountingId(r) for r in df["run"].iloc[::-1] if not r.endswith("7")]
    given.append(CountingId("not-a-run-of-this-set"))
    CountingId.compared, CountingId.budget = 0, 40 * n
    proxy.set_mode("all", frozenset(given))
    listed = proxy.visible_runs()
    assert listed == [r for r in df["run"] if not r.endswith("7")]   # in the set's order, unknown ids ignored
    assert CountingId.compared <= 40 * n


def test_only_given_runs_match_their_membership(model_proxy):
    model, proxy = model_proxy
    df = random_table(np.random.default_rng(11), 400)
    model.set_table(df)
    rng = np.random.default_rng(12)
    for _ in range(20):
        pick = set(rng.choice(df["run"], size=int(rng.integers(0, 60))).tolist()) | {"elsewhere-1"}
        proxy.set_mode(str(rng.choice(["all", "unlabeled", "flagged"])), frozenset(pick))
        assert proxy.visible_runs() == [r for r in df["run"] if r in pick]


class Signals:
    def __init__(self, proxy) -> None:
        self.resets = self.inserted = self.layouts = 0
        proxy.modelReset.connect(lambda: setattr(self, "resets", self.resets + 1))
        proxy.rowsInserted.connect(lambda *_: setattr(self, "inserted", self.inserted + 1))
        proxy.layoutChanged.connect(lambda *_: setattr(self, "layouts", self.layouts + 1))

    def total(self) -> int:
        return self.resets + self.inserted + self.layouts


def test_one_signal_per_change(model_proxy):
    model, proxy = model_proxy
    seen = Signals(proxy)
    model.set_table(random_table(np.random.default_rng(1), 200))
    assert (seen.resets, seen.total()) == (1, 1)
    proxy.sort(3, Qt.SortOrder.DescendingOrder)
    assert (seen.layouts, seen.total()) == (1, 2)
    proxy.set_mode("flagged")
    assert (seen.resets, seen.total()) == (2, 3)


def test_arriving_runs_are_one_insert_per_batch_in_set_order(model_proxy):
    model, proxy = model_proxy
    model.set_table(pd.DataFrame(columns=LABEL_COLUMNS))
    proxy.sort(0, Qt.SortOrder.AscendingOrder)
    seen = Signals(proxy)
    assert model.append_runs([f"run-{i}" for i in range(40)]) == 40
    assert (seen.inserted, seen.total()) == (1, 1)
    assert model.append_runs([f"run-{i}" for i in range(30, 90)]) == 50  # already listed ones are skipped
    assert (seen.inserted, seen.total()) == (2, 2)
    assert proxy.visible_runs() == [f"run-{i}" for i in range(90)]
    # sorted another way, the new rows land among the others: one reset instead
    proxy.sort(0, Qt.SortOrder.DescendingOrder)
    model.append_runs(["run-x", "run-y"])
    assert (seen.resets, seen.total()) == (1, 4)
    assert proxy.visible_runs()[:2] == ["run-y", "run-x"]


def test_table_lists_runs_with_counts_so_far_before_loading_ends(qtbot, tmp_path, monkeypatch):
    """The window lists runs as they arrive, says how many of how many, and fills in outcomes at the end."""
    from basinmark.core import sets
    from basinmark.gui.main_window import MainWindow

    root = make_toy_set(tmp_path / "toyset", ["left", "right", "recrossing", "unfinished", "left", "right"])
    real_open = sets.open_set
    release = threading.Event()

    def slow_open(path, *, progress=None, on_run=None, **kw):
        # the first three runs arrive, then loading waits until the test has looked at the table
        seen = []

        def each(traj):
            seen.append(traj.run_id)
            on_run(traj)
            if progress:
                progress(len(seen), 6, traj.run_id)
            if len(seen) == 3:
                release.wait(20)
        return real_open(path, progress=None, on_run=each, **kw)

    monkeypatch.setattr(sets, "open_set", slow_open)
    win = MainWindow(QSettings(str(tmp_path / "s.ini"), QSettings.Format.IniFormat))
    qtbot.addWidget(win)
    win.show()
    table = win.run_table
    resets = []
    table.proxy.modelReset.connect(lambda: resets.append(1))
    try:
        win.open_set(root, use_cache=False)
        resets.clear()  # opening empties the table (one reset per change); from here on runs arrive
        qtbot.waitUntil(lambda: table.proxy.rowCount() == 3, timeout=10000)
        assert win.busy  # still loading
        # the total comes with the progress, a queued signal that may come a turn after the rows
        qtbot.waitUntil(lambda: "3 of 6 runs listed so far" in table.count_label.text(), timeout=5000)
        assert table.filter_buttons["all"].text() == "All 3"
        assert table.filter_buttons["unlabeled"].text() == "Unlabeled"  # not known yet: no count
        # usable while loading: clicking a listed run shows it
        target = table.visible_runs()[2]
        table.view.setCurrentIndex(table.proxy.index(2, 0))
        assert win.state.run_id == target and win.state.traj is not None
        assert resets == []  # arrivals were inserted, never a reset
        rebuilt = []
        win.state.labels_changed.connect(lambda: rebuilt.append(1))
    finally:
        release.set()
    qtbot.waitUntil(lambda: not win.busy, timeout=20000)
    # the end of loading (set, journal, rules) rebuilds the label table once, and the table resets once
    assert len(rebuilt) == 1 and len(resets) == 1
    assert table.proxy.rowCount() == 6
    assert "6 runs" in table.count_label.text() and "listed so far" not in table.count_label.text()
    assert table.model.row(table.model.row_of("toy-002"))["auto_label"] == "right"
    assert win.state.run_id == target  # the run the person chose stays on screen
    win.close()

