"""A hand label, undo or note updates only its run's rows of the label table (no rebuild of every row), and what the
window shows stays what a plain model of the labels says: random labels, undos, notes, filters and sorts."""

from __future__ import annotations

import random

import pandas as pd
import pytest
from PySide6.QtCore import Qt
from PySide6.QtWidgets import QApplication

from basinmark.gui import label_table
from basinmark.gui.label_table import build_label_table, journal_notes
from basinmark.gui.map_view import install_map_dock
from basinmark.gui.run_table import FILTERS, NOT_CLEAN

from labeling_helpers import click_filter, make_root, open_window

pytestmark = pytest.mark.gui

LABELS = ["left", "right", "recrossing", "unfinished", "ambiguous"]


@pytest.fixture
def win(qtbot, tmp_path):
    root = make_root(tmp_path)
    w = open_window(qtbot, tmp_path, root)
    getattr(w, "set_labeler", w.label_panel.set_labeler)("kim")
    dock = install_map_dock(w)
    dock.show()
    dock.raise_()
    w.map_panel.refresh(force=True)
    yield w
    w.close()


def _whole(st) -> pd.DataFrame:
    """The label table built from scratch (every row), as a full refresh builds it."""
    jstate = st.journal.state(current_hashes=dict(st.tset.content_hashes()))
    return build_label_table(st.run_ids, st.classification, jstate, journal_notes(st.journal))


class Model:
    """What the window must show, kept by the test alone: per run the automatic outcome, a stack of hand labels
    (undo takes the latest back) and the note."""

    def __init__(self, st) -> None:
        rows = st.labels.set_index("run")
        self.auto = {r: rows.at[r, "auto_label"] for r in st.run_ids}
        self.flags = {r: rows.at[r, "flags"] for r in st.run_ids}
        self.hand: dict[str, list[str]] = {r: [] for r in st.run_ids}
        self.note = {r: "" for r in st.run_ids}

    def final(self, run: str) -> str:
        return self.hand[run][-1] if self.hand[run] else self.auto[run]

    def matches(self, run: str, mode: str) -> bool:
        hand = self.hand[run][-1] if self.hand[run] else ""
        return {"all": True, "flagged": bool(self.flags[run]), "unlabeled": not hand,
                "disagree": bool(hand) and hand != self.auto[run], "changed": False,
                "look": not hand and (bool(self.flags[run]) or self.auto[run] in NOT_CLEAN)}[mode]


def _check(win, model: Model, mode: str) -> None:
    st = win.state
    table = st.labels
    # the table equals one built from scratch, and says what the model says
    pd.testing.assert_frame_equal(table.reset_index(drop=True), _whole(st).reset_index(drop=True), check_dtype=False)
    for run in st.run_ids:
        row = st.label_row(run)
        assert row["final_label"] == model.final(run), run
        assert row["hand_label"] == (model.hand[run][-1] if model.hand[run] else "")
        assert row["note"] == model.note[run]
    # the run table's model holds the same cells; it lists the filter's runs (plus the one on screen)
    rt = win.run_table
    for k in ("final_label", "hand_label", "note", "labeler", "reason"):
        assert rt.model.column(k).tolist() == table[k].tolist(), k
    listed = set(rt.proxy.visible_runs())
    want = {r for r in st.run_ids if model.matches(r, mode)}
    assert want <= listed and listed - want <= {st.run_id}
    counts = {key: sum(model.matches(r, key) for r in st.run_ids) for key, _t, _tip in FILTERS}
    for key, text, _tip in FILTERS:
        assert rt.filter_buttons[key].text() == f"{text} {counts[key]}"
    if rt.proxy.sort_column >= 0:   # listed in the column's order (ties in the set's order)
        col = rt.proxy.sort_column
        keys = [rt.model.sort_key(col)[rt.model.row_of(r)] for r in rt.proxy.visible_runs()]
        if rt.proxy.sort_order == Qt.SortOrder.DescendingOrder:
            keys = [-k for k in keys]
        assert keys == sorted(keys)
    # the map colours every run by its final label (drawn in the turn after the labels changed)
    QApplication.processEvents()
    labels = win.map_panel.canvas.labels
    assert all(labels[r] == model.final(r) for r in st.run_ids)


@pytest.mark.parametrize("seed", [1, 2, 3])
def test_random_labels_undo_notes_and_filters_keep_the_table_right(win, seed, monkeypatch):
    whole = []
    real = label_table.build_label_table

    def counting(run_ids, *args, **kw):
        whole.append(len(run_ids))
        return real(run_ids, *args, **kw)

    monkeypatch.setattr("basinmark.gui.state.build_label_table", counting)
    rng = random.Random(seed)
    st, panel = win.state, win.label_panel
    model = Model(st)
    mode = "all"
    n_runs = len(st.run_ids)
    for step in range(45):
        op = rng.choice(["label", "label", "label", "undo", "note", "filter", "sort", "run"])
        visible = win.run_table.proxy.visible_runs()
        if op == "run" and visible:
            st.set_run(rng.choice(visible))
        elif op == "label" and st.run_id:
            label = rng.choice(LABELS)
            assert panel.apply_label(label, reason=f"step {step}")
            model.hand[st.run_id].append(label)
        elif op == "undo" and st.run_id:
            done = panel.undo()
            assert done == bool(model.hand[st.run_id])
            if done:
                model.hand[st.run_id].pop()
        elif op == "note" and st.run_id:
            text = rng.choice(["", "look again", f"odd at step {step}"])
            panel.note.setText(text)
            assert panel.save_note()
            model.note[st.run_id] = text
        elif op == "filter":
            mode = rng.choice([k for k, _t, _tip in FILTERS if k != "changed"])
            click_filter(win, mode)
        elif op == "sort":
            win.run_table.view.sortByColumn(rng.randrange(0, 5), rng.choice(
                [Qt.SortOrder.AscendingOrder, Qt.SortOrder.DescendingOrder]))
        _check(win, model, mode)
    # labels, undos and notes rebuilt only their own run's row, never the whole table
    assert whole and all(n == 1 for n in whole)
    assert max(whole) < n_runs


def test_a_change_of_rules_or_many_runs_rebuilds_the_whole_table(win):
    st = win.state
    st.journal.record("toy-003", "left", content_hash=st.tset["toy-003"].content_hash, reason="x")
    st.refresh_labels()
    assert st.labels_delta == frozenset({"toy-003"})
    st.set_rules(st.rules, st.classification.copy())   # another classification: every row again
    assert st.labels_delta is None
    st.INCREMENTAL_MAX_RUNS = 4
    for r in st.run_ids[:6]:   # more runs than that: every row again
        st.journal.record(r, "right", content_hash=st.tset[r].content_hash, reason="y")
    st.refresh_labels()
    assert st.labels_delta is None and (st.labels["final_label"][:6] == "right").all()
    batch = [{"run_id": r, "label": "left", "content_hash": st.tset[r].content_hash} for r in st.run_ids]
    st.journal.record_batch(batch, source="hand", labeler="kim")   # a batch (its own begin and commit events)
    st.refresh_labels()
    assert st.labels_delta is None and (st.labels["final_label"] == "left").all()
    pd.testing.assert_frame_equal(st.labels.reset_index(drop=True), _whole(st).reset_index(drop=True),
                                  check_dtype=False)


def test_a_label_table_built_ahead_is_taken_only_while_what_it_was_built_from_stands(win):
    """The turn that ends a load builds the label table ahead (AppState.prepare_labels) and announces it a turn later:
    the table built ahead is taken when nothing changed meanwhile, and dropped when something did (a hand label, other
    rules), so the table shown is always the one a build from scratch gives."""
    st = win.state
    st.prepare_labels()
    ahead = st._prepared[1]
    st.refresh_labels(whole=True)
    assert st.labels is ahead   # taken: nothing changed
    st.prepare_labels()
    st.journal.record("toy-002", "right", content_hash=st.tset["toy-002"].content_hash, reason="meanwhile")
    st.refresh_labels(whole=True)
    assert st.label_row("toy-002")["final_label"] == "right"   # dropped: the journal moved on
    st.prepare_labels()
    stale = st._prepared[1]
    st.set_rules(st.rules, st.classification.copy())   # other rules: dropped again
    assert st.labels is not stale
    pd.testing.assert_frame_equal(st.labels.reset_index(drop=True), _whole(st).reset_index(drop=True),
                                  check_dtype=False)
