"""Model-based random test of labeling in the window: 2,000 random actions (filter changes, row clicks,
sorts, key presses in the viewer, typing into the run table and the Reason field, label buttons, undo,
Go to Run, option toggles, notes, the search field) driven with real key and mouse events, against a small
model of what the journal must then hold.  Every journal event must name the run the label panel showed
when the action was taken, and the journal must hold exactly the events the model predicts; after every
action the counts the window shows (filter buttons, outcome counts under the table, status bar), the note
marks in the table and the runs a search lists equal the model's."""

from __future__ import annotations

import random
import time

import pytest
from PySide6.QtCore import Qt
from PySide6.QtTest import QTest

from basinmark.gui.run_table import FILTERS, NOT_CLEAN

from labeling_helpers import JournalTail, click_filter, click_header, click_row, make_root, open_window

pytestmark = pytest.mark.gui

N_ACTIONS = 2000
DIGITS = [Qt.Key.Key_1, Qt.Key.Key_2, Qt.Key.Key_3, Qt.Key.Key_4, Qt.Key.Key_5, Qt.Key.Key_6]
LETTERS = [Qt.Key.Key_N, Qt.Key.Key_P, Qt.Key.Key_F, Qt.Key.Key_U, Qt.Key.Key_T, Qt.Key.Key_C,
           Qt.Key.Key_R, Qt.Key.Key_L]
OTHER_KEYS = [Qt.Key.Key_PageDown, Qt.Key.Key_PageUp, Qt.Key.Key_Left, Qt.Key.Key_Right, Qt.Key.Key_Escape,
              Qt.Key.Key_Home, Qt.Key.Key_End]


class Model:
    """What the journal should hold, from what the person saw (the run the label panel named)."""

    def __init__(self, labels: list[str], ask: bool) -> None:
        self.labels = labels
        self.ask = ask
        self.pending: tuple[str, str] | None = None
        self.reason = ""
        self.finding = False
        self.hand: dict[str, list[str]] = {}
        self.expected: list[tuple] = []

    def request(self, shown: str, label: str) -> None:
        if not shown:
            return  # refused: no run selected
        if self.pending is not None or self.ask or label == "excluded" or self.reason.strip():
            self.pending = (shown, label)
            return
        self.expected.append(("label", shown, label, ""))
        self.hand.setdefault(shown, []).append(label)

    def enter(self) -> None:
        if self.pending is None:
            return
        run, label = self.pending
        if label == "excluded" and not self.reason.strip():
            return
        self.expected.append(("label", run, label, self.reason.strip()))
        self.hand.setdefault(run, []).append(label)
        self.pending, self.reason = None, ""

    def cancel(self) -> None:
        if self.pending is not None:
            self.pending, self.reason = None, ""

    def undo(self, shown: str) -> None:
        self.cancel()
        if shown and self.hand.get(shown):
            self.hand[shown].pop()
            self.expected.append(("undo", shown, None, ""))

    def final(self, auto: dict[str, str]) -> dict[str, str]:
        return {r: (self.hand[r][-1] if self.hand.get(r) else a) for r, a in auto.items()}

    def outcome_counts(self, auto: dict[str, str]) -> dict[str, int]:
        out: dict[str, int] = {}
        for label in self.final(auto).values():
            out[label] = out.get(label, 0) + 1
        return out

    def filter_counts(self, auto: dict[str, str], flagged: set[str]) -> dict[str, int]:
        hand = {r: (self.hand[r][-1] if self.hand.get(r) else "") for r in auto}
        return {
            "all": len(auto),
            "look": sum(1 for r in auto if not hand[r] and (r in flagged or auto[r] in NOT_CLEAN)),
            "flagged": len(flagged),
            "unlabeled": sum(1 for r in auto if not hand[r]),
            "disagree": sum(1 for r in auto if hand[r] and hand[r] != auto[r]),
            "changed": 0,
        }

    def seen(self, shown_after: str) -> None:
        """A pending label is dropped (with its reason) when another run comes on screen."""
        if self.pending is not None and self.pending[0] != shown_after:
            self.pending, self.reason = None, ""


@pytest.fixture
def root(tmp_path):
    return make_root(tmp_path)


def test_two_thousand_random_actions_label_only_the_run_shown(qtbot, tmp_path, root, capsys):
    win = open_window(qtbot, tmp_path, root)
    # drawing the traces is the slow part and not under test here; what they were given is checked
    win.traces.redraw = lambda keep_view=False: None
    win.run_table.view.FIND_TIMEOUT_S = 1e9      # finding ends by keys and clicks only, not by the clock
    win.set_labeler("model-tester")
    panel, table = win.label_panel, win.run_table
    labels = list(panel.buttons)
    rng = random.Random(9_2026)
    model = Model(labels, ask=win.actions_["ask_reason"].isChecked())
    viewers = {"table": table.view, "molecule": win.molecule, "traces": win.traces}
    filters = list(table.filter_buttons)
    ids = win.state.run_ids
    wrong_run = model_mismatch = state_mismatch = 0
    counts: dict[str, int] = {}
    seen_events = 0
    journal_events = JournalTail(root)
    notes: list[str] = []
    on_screen: list[str] = []
    win.state.run_changed.connect(on_screen.append)
    # what the classification says (labels never change it): the model's counts start from it
    auto = dict(zip(win.state.labels["run"], win.state.labels["auto_label"]))
    flagged = {r for r, f in zip(win.state.labels["run"], win.state.labels["flags"]) if f}
    notes_model: dict[str, str] = {}
    searching = ""
    search_want: set[str] = set()
    count_mismatch = search_mismatch = 0
    t0 = time.perf_counter()
    for step in range(N_ACTIONS):
        shown = panel.shown_run
        assert panel.title.text() == (shown or "No run")
        on_screen.clear()
        r = rng.random()
        typed_in_table = False
        extra = rng.random() < 0.08
        if extra:
            r2 = rng.random()
            if r2 < 0.4:
                kind = "note"
                text = rng.choice(["", f"zq{rng.randrange(3)} look again", f"zq{rng.randrange(3)}"])
                panel.note.setFocus()
                panel.note.clear()
                if text:
                    QTest.keyClicks(panel.note, text)
                if shown and panel.note.isEnabled():
                    (notes_model.__setitem__(shown, text) if text else notes_model.pop(shown, None))
                QTest.keyClick(panel.note, Qt.Key.Key_Return)
            elif r2 < 0.8:
                kind = "search"
                searching = f"zq{rng.randrange(3)}"
                table.search.setFocus()
                table.search.clear()
                QTest.keyClicks(table.search, searching)
                # the runs found when the search was typed: the list stays as it was (as "show only these runs"
                # does) while notes change, so that the view never moves by itself
                search_want = {r for r, t in notes_model.items() if searching in t}
            else:
                kind = "clear search"
                searching = ""
                table.search.clear()
        elif r < 0.10:
            kind = "filter"
            searching = ""
            click_filter(win, rng.choice(filters))
        elif r < 0.24:
            kind = "row"
            n = table.view.model().rowCount()
            if n:
                click_row(win, rng.randrange(n), rng.randrange(4))
        elif r < 0.28:
            kind = "sort"
            click_header(win, rng.randrange(table.view.model().columnCount()))
        elif r < 0.50:
            kind = "viewer key"
            where = rng.choice(list(viewers))
            widget = viewers[where]
            widget.setFocus()
            key = rng.choice(DIGITS * 3 + LETTERS + OTHER_KEYS)
            if key in DIGITS:
                if where == "table" and model.finding:
                    typed_in_table = True  # a digit goes on into the find text
                else:
                    model.request(shown, labels[DIGITS.index(key)])
            elif key in LETTERS and where == "table":
                typed_in_table = True      # a letter starts finding a run by its id
                model.finding = True
            QTest.keyClick(widget, key)
        elif r < 0.56:
            kind = "type in table"
            table.view.setFocus()
            typed_in_table = True
            model.finding = True
            QTest.keyClicks(table.view, f"toy-0{rng.randrange(16):02d}"[:rng.randrange(2, 8)])
        elif r < 0.66:
            kind = "type reason"
            panel.reason.setFocus()
            text = "".join(rng.choice("abcfnpu 0123456789-") for _ in range(rng.randrange(1, 6)))
            QTest.keyClicks(panel.reason, text)
            model.reason += text
        elif r < 0.76:
            kind = "enter in reason"
            panel.reason.setFocus()
            model.enter()
            QTest.keyClick(panel.reason, Qt.Key.Key_Return)
        elif r < 0.80:
            kind = "escape in reason"
            panel.reason.setFocus()
            model.cancel()
            QTest.keyClick(panel.reason, Qt.Key.Key_Escape)
        elif r < 0.90:
            kind = "label button"
            label = rng.choice(labels)
            model.request(shown, label)
            QTest.mouseClick(panel.buttons[label], Qt.MouseButton.LeftButton)
        elif r < 0.95:
            kind = "undo"
            widget = viewers[rng.choice(list(viewers))]
            widget.setFocus()
            model.undo(shown)
            QTest.keyClick(widget, Qt.Key.Key_Z, Qt.KeyboardModifier.ControlModifier)
        elif r < 0.97:
            kind = "go to run"
            dlg = win.goto_run()
            QTest.keyClicks(dlg.field, rng.choice(ids))
            dlg.go()
            dlg.close()
        else:
            kind = "toggle option"
            name = rng.choice(["ask_reason", "auto_advance"])
            if name == "ask_reason" and model.ask:
                model.cancel()      # turning the question off drops a pending label
            win.actions_[name].trigger()
            model.ask = win.actions_["ask_reason"].isChecked()
            typed_in_table = model.finding  # options do not end finding
        counts[kind] = counts.get(kind, 0) + 1
        if not typed_in_table:
            model.finding = False
        for run in on_screen + [panel.shown_run]:
            model.seen(run)
        events = journal_events()
        new = events[seen_events:]
        seen_events = len(events)
        for ev in new:
            if ev["run"] != shown:
                wrong_run += 1
        got = [(e["kind"], e["run"], e["label"] if e["kind"] == "label" else None, e.get("reason", ""))
               for e in new]
        want = model.expected[len(model.expected) - len(got):] if got else []
        n_expected_new = len(model.expected) - (seen_events - len(new))
        if got != want or n_expected_new != len(got):
            model_mismatch += 1
            notes.append(f"step {step} {kind}: journal got {got}, model wanted {model.expected[seen_events - len(new):]}")
            model.expected = [(e["kind"], e["run"], e["label"] if e["kind"] == "label" else None,
                               e.get("reason", "")) for e in events]  # resynchronise, keep counting
        # everything on screen names one run, and the pending label is the one the model expects
        sel = table.selected_run()
        traj = win.molecule.trajectory
        if (win.state.run_id != panel.shown_run or sel != win.state.run_id
                or (traj.run_id if traj is not None else "") != win.state.run_id
                or (win.traces._traj.run_id if win.traces._traj is not None else "") != win.state.run_id
                or panel.pending != model.pending or panel.reason.text() != model.reason):
            state_mismatch += 1
            notes.append(f"step {step} {kind}: shown {panel.shown_run!r} state {win.state.run_id!r} selected {sel!r} "
                         f"pending {panel.pending} (model {model.pending}) reason {panel.reason.text()!r} "
                         f"(model {model.reason!r})")
            model.pending, model.reason = panel.pending, panel.reason.text()
        # the counts shown equal the model's: filter buttons, the counts under the table, the status bar
        want_filters = model.filter_counts(auto, flagged)
        got_filters = {k: table.filter_buttons[k].text() for k, _t, _tip in FILTERS}
        want_outcomes = {k: v for k, v in model.outcome_counts(auto).items() if v}
        shown_counts = table.outcome_counts()
        if (got_filters != {k: f"{text} {want_filters[k]}" for k, text, _tip in FILTERS}
                or {k: v for k, v in shown_counts.items() if v} != want_outcomes
                or any(f"{k} {v}" not in table.count_label.text() for k, v in want_outcomes.items())
                or any(f"{k}: {v}" not in win.status_counts.text() for k, v in want_outcomes.items())):
            count_mismatch += 1
            notes.append(f"step {step} {kind}: filters {got_filters} (model {want_filters}); outcomes "
                         f"{shown_counts} (model {want_outcomes})")
        # note marks in the table, and what a search lists
        src = table.model
        marked = {src.row(i)["run"] for i in range(src.rowCount())
                  if src.index(i, 0).data(Qt.ItemDataRole.DecorationRole) is not None}
        if marked != {r for r, t in notes_model.items() if t}:
            search_mismatch += 1
            notes.append(f"step {step} {kind}: note marks {sorted(marked)} (model {sorted(notes_model)})")
        if searching and table.search.text() == searching:
            if set(table.visible_runs()) != search_want:
                search_mismatch += 1
                notes.append(f"step {step} {kind}: search {searching!r} lists {table.visible_runs()} "
                             f"(model {sorted(search_want)})")
    elapsed = time.perf_counter() - t0
    events = journal_events()
    with capsys.disabled():
        print(f"\nmodel-based labeling test: {N_ACTIONS} actions in {elapsed:.1f} s, {len(events)} journal events "
              f"({sum(e['kind'] == 'undo' for e in events)} undo); events naming another run than the panel showed: "
              f"{wrong_run}; journal differing from the model: {model_mismatch}; window state differing: "
              f"{state_mismatch}; counts differing: {count_mismatch}; notes or search differing: {search_mismatch}; "
              f"actions: {counts}")
        for line in notes[:12]:
            print("  ", line)
    win.close()
    assert wrong_run == 0
    assert model_mismatch == 0
    assert state_mismatch == 0
    assert count_mismatch == 0
    assert search_mismatch == 0
    assert counts.get("note", 0) > 10 and counts.get("search", 0) > 10
    assert len(events) > 100
