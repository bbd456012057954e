"""The window's application state: one QObject that the views observe.

It holds the open set, the current run and frame, the picked atoms, the
monitors a person added, the rules with their classification, the label
journal and the merged label table.  Views call its setters and listen to
its signals; they never talk to each other.
"""

from __future__ import annotations

from contextlib import contextmanager
from typing import Any, Iterator

import numpy as np
import pandas as pd
from PySide6.QtCore import QObject, Signal

from basinmark.core.model import Trajectory, TrajectorySet
from basinmark.gui.label_table import LABEL_COLUMNS, build_label_table, journal_notes


def _same_basis(a: tuple, b: tuple) -> bool:
    """Two label-table bases (AppState._basis) alike: the same objects, and the same counts."""
    return len(a) == len(b) and all(x is y or (type(x) is int and type(y) is int and x == y) for x, y in zip(a, b))


def label_basis(journal, classification, rules, tset, blind_labeler: str = "") -> tuple:
    """What a label table is built from, compared by identity (:func:`_same_basis`): the journal and how far it was
    read, classification, rules, set and its size, blind labeling."""
    events = journal.events if journal is not None and hasattr(journal, "events") else []
    return (journal, len(events), events[-1] if events else None, classification, rules, tset,
            len(tset) if tset is not None else 0, blind_labeler)


def whole_label_table(tset, journal, classification, blind_labeler: str = "") -> tuple[pd.DataFrame, list[str]]:
    """The label table of every run of ``tset`` (see build_label_table), and the runs ``journal`` labels that are not
    in the set.  No Qt: the loader builds it ahead on its own thread (:class:`LabelsAhead`)."""
    jstate = None
    if journal is not None and tset is not None:
        if blind_labeler:
            from basinmark.core.review import blind_state

            jstate = blind_state(journal, blind_labeler, dict(tset.content_hashes()))
        else:
            jstate = journal.state(current_hashes=dict(tset.content_hashes()))
    run_ids = [] if tset is None else tset.run_ids
    notes = journal_notes(journal, blind_labeler) if tset is not None else {}
    outside: list[str] = []
    if jstate is not None and len(jstate) and "final_label" in jstate:
        labeled = jstate["run"][jstate["final_label"].notna().to_numpy()].astype(str)
        outside = sorted(labeled[~labeled.isin(run_ids)].tolist())
    return build_label_table(run_ids, classification, jstate, notes), outside


class LabelsAhead:
    """A label table built before the window's state holds what it stands on (the loader builds it beside opening
    the journal: at 10,000 runs with 20,000 events it was the longest turn that ends a load, 86-108 ms)."""

    def __init__(self, tset, journal, classification, rules) -> None:
        self.basis = label_basis(journal, classification, rules, tset)
        self.table, self.outside = whole_label_table(tset, journal, classification)

    def basis_matches(self, basis: tuple) -> bool:
        return _same_basis(self.basis, basis)


class AppState(QObject):
    set_changed = Signal()
    run_changed = Signal(str)          # run id, "" when none
    frame_changed = Signal(int)
    labels_changed = Signal()
    rules_changed = Signal()
    picks_changed = Signal(list)       # 1-based atom numbers
    monitors_changed = Signal()        # user monitors added or removed
    journal_changed = Signal()
    runs_arrived = Signal()            # runs were added while the set loads (add_run); views list them in batches

    def __init__(self, parent: QObject | None = None) -> None:
        super().__init__(parent)
        self.tset: TrajectorySet | None = None
        self.run_id: str = ""
        self.frame: int = 0
        self.picked: list[int] = []
        self.user_monitors: list[tuple[int, ...]] = []   # 1-based atom numbers, 2 to 4 each
        self.rules: Any = None
        self.rules_error: str = ""
        self.classification: pd.DataFrame | None = None
        self.journal: Any = None
        self.loading: bool = False  # a set is being loaded or classified in the background
        self.journal_message: str = ""
        #: blind labeling: show only this person's hand labels, hide everyone else's ("" = off)
        self.blind_labeler: str = ""
        self.labels: pd.DataFrame = pd.DataFrame(columns=LABEL_COLUMNS)
        self._results: dict[str, Any] = {}
        self.run_errors: dict[str, str] = {}
        self._labels_held = 0        # inside labels_batch(): refresh_labels waits for the end
        self._labels_stale = False
        self._prepared: tuple | None = None   # (basis, table, outside) built ahead by prepare_labels, not announced
        #: runs the journal holds a label for that are not in the set (not shown or counted; the window says so)
        self.labels_outside: list[str] = []
        #: the runs whose rows the last refresh_labels changed (a hand label, undo or note), or None when the whole
        #: table was built again; views may update just those rows
        self.labels_delta: frozenset[str] | None = None
        self._labels_basis: tuple | None = None

    # --- set and runs -------------------------------------------------------------------
    @property
    def traj(self) -> Trajectory | None:
        if self.tset is None or not self.run_id or self.run_id not in self.tset:
            return None
        return self.tset[self.run_id]

    @property
    def run_ids(self) -> list[str]:
        return [] if self.tset is None else self.tset.run_ids

    def set_set(self, tset: TrajectorySet | None) -> None:
        self.tset = tset
        self._prepared = None
        self.classification = None
        self._results.clear()
        self.user_monitors = []
        self.run_id = ""
        self.frame = 0
        self.set_changed.emit()
        self.refresh_labels()
        self.monitors_changed.emit()
        if tset is not None and len(tset):
            self.set_run(tset.run_ids[0])
        else:
            self.run_changed.emit("")

    def add_run(self, traj: Trajectory) -> None:
        """A run arrived while the set is still loading (shown at once if nothing is shown yet)."""
        self.add_runs([traj])

    def add_runs(self, trajs, show_first: bool = True) -> None:
        """Runs that arrived while the set is still loading, one signal for the batch (the first is shown at once
        if nothing is shown yet, unless ``show_first`` is false: the window shows it in a turn of its own)."""
        if self.tset is None or not trajs:
            return
        for traj in trajs:
            self.tset.runs[traj.run_id] = traj
        self.runs_arrived.emit()
        if show_first and not self.run_id:
            self.set_run(trajs[0].run_id)

    def set_run(self, run_id: str) -> None:
        if self.tset is None or run_id not in self.tset:
            return
        if run_id == self.run_id:
            return
        self.run_id = run_id
        traj = self.tset[run_id]
        self.frame = traj.ts_index
        self.set_picks([])
        self.run_changed.emit(run_id)
        self.frame_changed.emit(self.frame)

    def clear_run(self) -> None:
        """Show no run (e.g. a quick filter that matches none): nothing can be labeled until one is chosen."""
        if not self.run_id:
            return
        self.run_id = ""
        self.frame = 0
        self.set_picks([])
        self.run_changed.emit("")
        self.frame_changed.emit(0)

    def set_frame(self, frame: int) -> None:
        traj = self.traj
        if traj is None:
            return
        frame = int(np.clip(frame, 0, traj.n_frames - 1))
        if frame != self.frame:
            self.frame = frame
            self.frame_changed.emit(frame)

    def set_time(self, t_fs: float) -> None:
        """Go to the frame nearest to time ``t_fs``."""
        traj = self.traj
        if traj is not None:
            self.set_frame(int(np.argmin(np.abs(traj.times - t_fs))))

    @property
    def time(self) -> float | None:
        traj = self.traj
        return None if traj is None else float(traj.times[self.frame])

    # --- picks and monitors -------------------------------------------------------------
    def set_picks(self, atoms: list[int]) -> None:
        atoms = [int(a) for a in atoms]
        if atoms != self.picked:
            self.picked = atoms
            self.picks_changed.emit(list(atoms))

    def add_monitor(self, atoms: tuple[int, ...]) -> None:
        atoms = tuple(int(a) for a in atoms)
        if not 2 <= len(atoms) <= 4 or len(set(atoms)) != len(atoms):
            return
        if atoms in self.user_monitors or atoms[::-1] in self.user_monitors:
            return
        self.user_monitors.append(atoms)
        self.monitors_changed.emit()

    def clear_monitors(self) -> None:
        if self.user_monitors:
            self.user_monitors = []
            self.monitors_changed.emit()

    # --- rules, classification ------------------------------------------------------------
    def set_rules(self, rules: Any, classification: pd.DataFrame | None, error: str = "") -> None:
        self.rules = rules
        self.rules_error = error
        self.classification = classification
        self._results.clear()
        self.run_errors.clear()
        self.rules_changed.emit()
        self.refresh_labels()

    def run_result(self, run_id: str | None = None) -> Any:
        """The classification details (basin track, monitors) of a run, computed once on demand."""
        run_id = run_id or self.run_id
        if self.rules is None or self.tset is None or run_id not in self.tset:
            return None
        if run_id not in self._results:
            from basinmark.core.classify import classify_run

            try:
                self._results[run_id] = classify_run(self.tset[run_id], self.rules)
            except Exception as exc:  # one odd run must not break the window; say why instead
                self.run_errors[run_id] = f"{run_id} could not be classified: {type(exc).__name__}: {exc}"
                self._results[run_id] = None
        return self._results[run_id]

    # --- journal and labels ---------------------------------------------------------------
    def set_journal(self, journal: Any, message: str = "") -> None:
        if self.journal is not None and self.journal is not journal:
            try:
                self.journal.close()
            except Exception:  # closing must never block opening another set
                pass
        self.journal = journal
        self.journal_message = message
        self.journal_changed.emit()
        self.refresh_labels()

    @property
    def readonly(self) -> bool:
        return self.journal is None or bool(getattr(self.journal, "readonly", True))

    def set_blind(self, labeler: str) -> None:
        """Blind labeling as ``labeler`` (other people's hand labels hidden everywhere), or off with ""."""
        self.blind_labeler = (labeler or "").strip()
        self.refresh_labels()

    @contextmanager
    def labels_batch(self) -> Iterator[None]:
        """Several changes (set, journal, rules) that each rebuild the label table rebuild it once, at the end
        (every view rebuilds on labels_changed: three rebuilds of 10,000 rows froze the window for seconds)."""
        self._labels_held += 1
        try:
            yield
        finally:
            self._labels_held -= 1
            if not self._labels_held and self._labels_stale:
                self.refresh_labels()

    #: at most this many runs named by new journal events have their rows updated; more rebuild the whole table
    #: (our own choice: a row costs ~0.1 ms, the whole table of 10,000 runs ~0.4 s, measured)
    INCREMENTAL_MAX_RUNS = 64

    def _basis(self) -> tuple:
        """What the label table was built from (compared by identity): journal and how far it was read,
        classification, rules, set and its size, blind labeling."""
        return label_basis(self.journal, self.classification, self.rules, self.tset, self.blind_labeler)

    def _changed_runs(self) -> list[str] | None:
        """The runs named by journal events since the table was built, when nothing else changed (then only their
        rows need building again); None when the whole table must be built."""
        basis, j = self._labels_basis, self.journal
        if basis is None or j is None or self.tset is None or self.blind_labeler or not hasattr(j, "events"):
            return None
        journal, n_events, last, cls, rules, tset, n_runs, blind = basis
        events = j.events
        if (journal is not j or cls is not self.classification or rules is not self.rules or tset is not self.tset
                or n_runs != len(self.tset)
                or blind != self.blind_labeler or len(self.labels) != n_runs or len(events) < n_events
                or (n_events and events[n_events - 1] is not last)):
            return None
        runs: dict[str, None] = {}
        for ev in events[n_events:]:
            run = ev.get("run")
            if ev.get("kind") not in ("label", "undo", "note") or not run or str(run) not in self.tset:
                return None
            runs[str(run)] = None
            if len(runs) > self.INCREMENTAL_MAX_RUNS:
                return None
        return list(runs)

    def _update_label_rows(self, runs: list[str]) -> None:
        """Build the rows of ``runs`` again (the rules of build_label_table, row by row the same) into a copy of the
        table (a new object: views that keep something per table see the change)."""
        self._index_rows()
        at = self._row_at
        ids = sorted(runs, key=at.__getitem__)
        pos = [at[r] for r in ids]
        tset = self.tset
        jstate = self.journal.state(current_hashes={r: tset[r].content_hash for r in ids}, runs=ids)
        notes = {r: n for r in ids if (n := self.journal.run_note(r))} if hasattr(self.journal, "run_note") else {}
        cls = self.classification
        if cls is not None and "run" in cls.columns and len(cls):
            cls = cls[cls["run"].astype(str).isin(ids)]
        part = build_label_table(ids, cls, jstate, notes)
        table = self.labels.copy()
        for k in LABEL_COLUMNS:
            values = part[k].tolist()
            table.iloc[pos, table.columns.get_loc(k)] = part[k].to_numpy()
            column = self._columns.get(k)
            if column is not None:
                for i, v in zip(pos, values):
                    column[i] = v
        self.labels = table
        self._rows_of = table   # the row index and columns above are this table's
        self.labels_delta = frozenset(ids)
        self._labels_basis = self._basis()
        self.labels_changed.emit()

    def refresh_labels(self, whole: bool = False) -> None:
        """Build the label table again and say so (``labels_changed``).  When only journal events of a few runs (hand
        labels, undo, notes) came since the last build, only their rows are built again (``labels_delta`` names
        them); ``whole`` builds every row."""
        if self._labels_held:
            self._labels_stale = True
            return
        self._labels_stale = False
        runs = None if whole else self._changed_runs()
        if runs is not None:
            if runs:
                self._update_label_rows(runs)
            return   # no event since the table was built: it stands as it is
        basis = self._basis()
        prepared, self._prepared = self._prepared, None
        fresh = prepared[1:] if prepared is not None and _same_basis(prepared[0], basis) else self._whole_table()
        self.labels, self.labels_outside = fresh
        self.labels_delta = None
        self._labels_basis = basis
        self.labels_changed.emit()

    def prepare_labels(self) -> None:
        """Build the whole label table now, to be announced by the next :meth:`refresh_labels` (the end of a load
        builds it in one turn and rebuilds the views in the next); dropped there when what it was built from
        (journal and how far it was read, classification, rules, set) changed meanwhile."""
        basis = self._basis()
        if self._prepared is not None and _same_basis(self._prepared[0], basis):
            return   # built ahead (offer_labels) from the same journal, classification, rules and set
        self._prepared = (basis, *self._whole_table())

    def _whole_table(self) -> tuple[pd.DataFrame, list[str]]:
        """The label table of the set's runs, and the runs the journal labels that are not in the set."""
        return whole_label_table(self.tset, self.journal, self.classification, self.blind_labeler)

    def offer_labels(self, ahead: "LabelsAhead | None") -> None:
        """Take a label table built ahead (by the loader, off this thread) as the one the next :meth:`refresh_labels`
        announces, if it was built from what the table now stands on; else ignore it."""
        if ahead is not None and ahead.basis_matches(self._basis()):
            self._prepared = (self._basis(), ahead.table, ahead.outside)

    def _index_rows(self) -> None:
        if getattr(self, "_rows_of", None) is not self.labels:
            self._row_at = dict(zip(self.labels["run"].tolist(), range(len(self.labels)))) if len(self.labels) else {}
            self._columns = {k: self.labels[k].tolist() for k in self.labels.columns}
            self._rows_of = self.labels

    def label_row(self, run_id: str | None = None) -> dict | None:
        """The run's row of the label table as a dict (a copy), or None."""
        run_id = run_id or self.run_id
        # the rows are indexed once per table: a pandas lookup per call cost ~10 ms, and views ask on every
        # run change and frame (measured with cProfile on the window tests)
        # (by columns: a dict per row of 10,000 rows was itself ~0.2 s of the turn that ends a load)
        self._index_rows()
        i = self._row_at.get(run_id)
        return None if i is None else {k: v[i] for k, v in self._columns.items()}
