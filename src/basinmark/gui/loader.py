"""Loading and classifying a set in a worker thread, reporting progress, cancellable.

The worker calls the core (``quick_open`` or ``open_set``, ``load_rules``, ``classify_set``) and
only emits signals; the window receives them in the GUI thread (queued).  Runs that arrive are put in
a queue that :class:`LoadJob` empties from the window's thread every ``LoadJob.ARRIVALS_MS`` into one
list: ten thousand queued signals, one per run, would be one long turn of the window's event loop, and
runs held back by the worker until the next one arrives would wait as long as a slow file.  :class:`FileCheckWorker` hashes a set's files
after it is shown (the full check after a quick one, see :mod:`basinmark.core.quick_open`).
"""

from __future__ import annotations

import threading
import time
from collections import deque
from pathlib import Path

from PySide6.QtCore import QObject, QThread, QTimer, Signal

from basinmark.core.errors import BasinmarkError


class ProgressThrottle:
    """Passes progress on at most every ``every_s`` seconds per phase (always the first and the last of a phase).

    A signal per run queued from a worker thread is one event each for the window's thread, and Qt delivers every
    queued event before the next timer: ten thousand runs read quickly were one long turn of the event loop
    (a progress bar repainted per run, measured with the sampler of bench/bench_window_scale.py)."""

    def __init__(self, emit, every_s: float = 0.05) -> None:
        self.emit = emit
        self.every_s = every_s
        self._last = -1.0
        self._phase = None

    def __call__(self, phase: str, done: int, total: int, _run=None) -> None:
        now = time.monotonic()
        if phase == self._phase and done < total and now - self._last < self.every_s:
            return
        self._phase, self._last = phase, now
        self.emit(phase, done, total)


class SetLoader(QObject):
    """Does the work; lives in a QThread.  Emits ``done(result dict)`` exactly once.

    With the cache, a set whose files all have the size and time recorded with its snapshot is opened from it
    at once (``result["quick"]``, to be checked fully in the background with :class:`FileCheckWorker`).
    """

    progress = Signal(str, int, int)     # phase ("Loading" | "Classifying"), done, total
    done = Signal(object)                # {"tset", "rules", "classification", "rules_error", "error", "cancelled",
    #                                       "quick": QuickOpen | None}
    first_arrived = Signal()             # the first run is in ``arrived`` (the others wait for LoadJob's poll)

    def __init__(self, path: str | Path, rules_file: str | Path | None = None, *, use_cache: bool = True,
                 journal: tuple[Path | None, str | None] | None = None) -> None:
        """``journal``: (where the window keeps this set's journal if not in the set folder, the labeler) to open an
        existing journal here (:meth:`open_journal`); None opens none."""
        super().__init__()
        self.path = Path(path)
        self.rules_file = Path(rules_file) if rules_file else None
        self.use_cache = use_cache
        self.journal_ask = journal
        self._cancel = threading.Event()
        self.arrived: deque = deque()   # runs ready to show; LoadJob takes them in the window's thread
        self._told_first = False

    def cancel(self) -> None:
        self._cancel.set()

    @property
    def cancelled(self) -> bool:
        return self._cancel.is_set()

    def run(self) -> None:
        from basinmark.core.sets import beside_a_window, open_set, rules_path

        progress = ProgressThrottle(self.progress.emit)

        def arrive(traj) -> None:   # the first run is said at once (first_arrived); the rest wait for the poll
            self.arrived.append(traj)
            if not self._told_first:
                self._told_first = True
                self.first_arrived.emit()

        out = {"path": self.path, "tset": None, "rules": None, "classification": None, "rules_error": "",
               "error": "", "cancelled": False, "quick": None, "use_cache": self.use_cache}
        try:
            quick = None
            changes: list[str] = []  # runs added or removed since the set was last opened (said in its warnings)
            with beside_a_window():   # the pool parses: a parse in this thread slows the window's paints
                if self.use_cache:
                    from basinmark.core.quick_open import quick_open

                    quick = quick_open(self.path, on_run=arrive, changes=changes)
                if quick is not None:
                    tset = quick.tset
                    out["quick"] = quick
                    progress("Loading", len(tset), len(tset))
                else:
                    tset = open_set(self.path, use_cache=self.use_cache, cancel=self._cancel.is_set,
                                    progress=lambda d, t, _r: progress("Loading", d, t),
                                    on_run=arrive)
            tset.warnings.extend(changes)
            # every run's content hash is worked out here, off the window's thread, also when no rules classify the
            # runs (classification asks for them first): the label table built when the load ends asks for all
            tset.content_hashes()
            out["tset"] = tset
            out["cancelled"] = self.cancelled
            rules_file = self.rules_file or rules_path(tset.root)
            # the runs loaded before a cancel are still classified (quick next to loading); a cancel
            # during classification stops it
            out.update(classify_with_rules(tset, rules_file, lambda d, t, _r: progress("Classifying", d, t),
                                           cancel=None if self.cancelled else self._cancel.is_set))
            out["journal"] = self.open_journal(tset, out.get("rules"), out.get("classification"))
        except BasinmarkError as exc:
            out["error"] = str(exc)
        except Exception as exc:  # the window must survive anything a broken folder does
            out["error"] = f"{self.path}: could not be opened ({type(exc).__name__}: {exc})"
        if out.get("error") and out.get("journal") is not None:
            close_opened(out.pop("journal"))
        self.done.emit(out)

    def open_journal(self, tset, rules, classification=None) -> "OpenedJournal | None":
        """The set's label journal opened for labeling here, off the window's thread (reading, checking and replaying
        20,000 events took 254-282 ms, in the turn that ends the load), when it exists and opens without a question;
        else None, and the window opens it itself (a new journal, a lock to offer to break, a read-only fallback)."""
        from basinmark.core.journal import LabelJournal
        from basinmark.core.labels import all_labels
        from basinmark.core.not_a_set import holds_no_runs
        from basinmark.core.sets import journal_path

        if self.journal_ask is None or holds_no_runs(tset):   # not a set: nothing is written into the folder
            return None
        elsewhere, labeler = self.journal_ask
        path = elsewhere or journal_path(tset.root)
        if not path.is_file():
            return None
        try:
            journal = LabelJournal.open(path, set_id=tset.name, labeler=labeler,
                                        allowed=all_labels(rules) if rules is not None else None)
        except Exception:  # noqa: BLE001 -- the window opens it again and says why (or offers to break a lock)
            return None
        try:
            from basinmark.core.review import people

            # each person's labels, which the review compares, built here too (kept until the next event; one
            # person's from 20,000 events took ~20 ms of the review's comparing turn)
            for who in people(journal):
                journal.labels(who)
        except Exception:  # noqa: BLE001 -- only work done ahead; the review builds them itself otherwise
            pass
        opened = OpenedJournal(path, labeler, rules, journal)
        try:
            from basinmark.gui.state import LabelsAhead

            # and the window's label table (the longest turn that ends a load at 10,000 runs: 86-108 ms)
            opened.labels = LabelsAhead(tset, journal, classification, rules)
        except Exception:  # noqa: BLE001 -- only work done ahead; the window builds it itself otherwise
            opened.labels = None
        return opened


class OpenedJournal:
    """A journal the loader opened, with what it was opened for (the window takes it only if that is what it would
    open itself, else closes it: :func:`close_opened`)."""

    def __init__(self, path: Path, labeler: str | None, rules, journal) -> None:
        self.path, self.labeler, self.rules, self.journal = path, labeler, rules, journal
        self.labels = None   # the label table built ahead (gui.state.LabelsAhead), offered to the window's state

    def fits(self, path: Path, labeler: str | None, rules) -> bool:
        return self.path == path and self.labeler == labeler and self.rules is rules


    def take(self):
        """The journal, handed over once: afterwards :func:`close_opened` leaves it to whoever took it."""
        journal, self.journal = self.journal, None
        return journal


def close_opened(opened: "OpenedJournal | None") -> None:
    """Close a journal the loader opened that nobody took (its lock released); one taken is left alone."""
    journal = opened.take() if opened is not None else None
    if journal is not None:
        try:
            journal.close()
        except Exception:  # noqa: BLE001 -- closing must never stop what comes next
            pass


def classify_with_rules(tset, rules_file, progress=None, cancel=None) -> dict:
    """Load the rules (a path, or Rules already made) and classify every run.

    Problems become a plain sentence in ``rules_error``; a cancelled classification gives
    no table (never a partial one) and says so.
    """
    from basinmark.core.classify import ClassificationCancelled, classify_set
    from basinmark.core.rules import load_rules

    out = {"rules": None, "classification": None, "rules_error": ""}

    def classify(rules) -> None:
        if not len(tset):
            return
        try:
            out["classification"] = classify_set(tset, rules, progress=progress, cancel=cancel)
        except ClassificationCancelled:
            out["rules"] = None
            out["rules_error"] = "Classification was cancelled, so no run has an automatic outcome from these rules."

    if not isinstance(rules_file, (str, Path)):
        out["rules"] = rules_file
        classify(rules_file)
        return out
    rules_file = Path(rules_file)
    if not rules_file.is_file():
        out["rules_error"] = (f"No rules file at {rules_file}: the runs are shown without automatic outcomes. "
                              "Use File ▸ Open Rules… to classify them.")
        return out
    try:
        rules = load_rules(rules_file, n_atoms=tset.n_atoms)
    except BasinmarkError as exc:
        out["rules_error"] = f"The rules file could not be used, so nothing is classified: {exc}"
        return out
    out["rules"] = rules
    classify(rules)
    return out


class RulesWorker(QObject):
    """Re-classifies an open set with another rules file (same result keys as SetLoader)."""

    progress = Signal(str, int, int)
    done = Signal(object)

    def __init__(self, tset, rules_file) -> None:
        """``rules_file``: a path to load, or a Rules object (e.g. with a dragged threshold)."""
        super().__init__()
        self.tset = tset
        self.rules_file = Path(rules_file) if isinstance(rules_file, (str, Path)) else rules_file
        self._cancel = threading.Event()

    def cancel(self) -> None:
        self._cancel.set()

    def run(self) -> None:
        out = {"path": self.tset.root, "tset": self.tset, "error": "", "cancelled": False, "rules_only": True}
        progress = ProgressThrottle(self.progress.emit)
        try:
            out.update(classify_with_rules(self.tset, self.rules_file, lambda d, t, _r: progress("Classifying", d, t),
                                           cancel=self._cancel.is_set))
        except Exception as exc:  # report, never crash the window
            out.update({"rules": None, "classification": None,
                        "rules_error": f"Classification failed: {type(exc).__name__}: {exc}"})
        self.done.emit(out)


class FileCheckWorker(QObject):
    """Hashes every file of an open set in the background: after a quick open, names the files whose content
    is not what the snapshot shown was made from; after any open, records the files so the next open is quick.
    Emits ``done(FullCheck or an error sentence)`` exactly once."""

    progress = Signal(str, int, int)   # unused; keeps the worker interface uniform
    done = Signal(object)

    #: the check starts this long after it is asked for (at the end of a load): its first work is Python (a stat and
    #: a name for each of 20,000 files), which held Python's lock against the paints of the load's last turn (that
    #: turn's gap was 84-90 ms at 10,000 runs, bench_window_scale); a cancel ends the wait at once
    START_DELAY_S = 0.25

    def __init__(self, root, quick=None) -> None:
        super().__init__()
        self.root = Path(root)
        self.quick = quick
        self._cancel = threading.Event()

    def cancel(self) -> None:
        self._cancel.set()

    def run(self) -> None:
        from basinmark.core import quick_open

        self._cancel.wait(self.START_DELAY_S)
        try:
            result = quick_open.full_check(self.root, self.quick, cancel=self._cancel.is_set)
        except Exception as exc:  # the check must never break the window: say so instead
            result = f"The set's files could not be checked against the cache ({type(exc).__name__}: {exc})."
        self.done.emit(result)


class LoadJob(QObject):
    """Owns the thread and the worker of one job; ``finished(result)`` in the GUI thread.

    ``run_loaded(list)``: the runs the worker put in its ``arrived`` queue, taken every ``ARRIVALS_MS``."""

    finished = Signal(object)
    run_loaded = Signal(object)

    ARRIVALS_MS = 60

    def __init__(self, worker: QObject, parent: QObject | None = None) -> None:
        super().__init__(parent)
        self.thread = QThread()
        self.worker = worker
        self.worker.moveToThread(self.thread)
        self.thread.started.connect(self.worker.run)
        self.worker.done.connect(self._on_done)
        self.progress = self.worker.progress
        self._arrivals = QTimer(self)
        self._arrivals.setInterval(self.ARRIVALS_MS)
        self._arrivals.timeout.connect(self._take_arrivals)
        first = getattr(self.worker, "first_arrived", None)
        if first is not None:   # the first run is taken at once, not at the next poll (queued: the worker's thread)
            first.connect(self._take_arrivals)

    def start(self) -> None:
        if hasattr(self.worker, "arrived"):
            self._arrivals.start()
        self.thread.start()

    def _take_arrivals(self) -> None:
        queue = getattr(self.worker, "arrived", None)
        if not queue:
            return
        batch = []
        while queue:
            batch.append(queue.popleft())
        self.run_loaded.emit(batch)

    def cancel(self) -> None:
        self.worker.cancel()

    def _on_done(self, result: dict) -> None:
        self._arrivals.stop()
        self._take_arrivals()   # the last runs before the result
        self.thread.quit()
        self.thread.wait(5000)
        self.finished.emit(result)

    def wait(self, ms: int = 10000) -> bool:
        self.worker.cancel()
        self.thread.quit()
        return self.thread.wait(ms)
