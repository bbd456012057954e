"""The starting-conditions analysis (:func:`basinmark.core.origins.analyse`) in a worker process of its own.

Python runs one thread of a process at a time.  The analysis is hundreds to thousands of scikit-learn fits, each
one call that cannot pause, with Python between its native parts; run on a thread of the window, it held Python's
lock often enough that the window's own turns took up to three times as long (at 10,000 runs, choosing the
review's sources: 101-198 ms of which the window's thread ran 63-79 ms, measured).  In a process of its own the
fits take the other core and leave the window's lock alone; scikit-learn is imported there, once, not in the
window.

One process serves the whole program, one analysis at a time, and is kept for the next (its imports cost about a
second).  It is a worker of :mod:`basinmark.core.process_context`: forked from the fork server, never running the
caller's script, at a lower priority, and ended with the caller.  Progress comes back through a queue and a
cancel goes out through an event: the analysis stops after the fit it is in, as on a thread.
"""

from __future__ import annotations

import concurrent.futures as cf
import os
import queue as queue_mod
import threading
from concurrent.futures.process import BrokenProcessPool
from typing import Callable, Mapping, Sequence

from basinmark.core.origins_start import OriginsError, StartingConditions

#: how often (s) the caller forwards progress and looks whether it was asked to cancel
POLL_S = 0.05

_worker: dict = {}   # in the worker process: its cancel event and progress queue


def _start_worker(cancel, progress, caller: int) -> None:
    """The worker's initializer: a lower priority, ended with the caller, and its two channels kept."""
    from basinmark.core.process_context import lower_priority

    lower_priority(caller)
    _worker.update(cancel=cancel, progress=progress)


def _analyse_in_worker(start, outcome, settings, include, columns):
    """In the worker: the analysis, telling each fit through the queue and stopping when the event is set."""
    from basinmark.core.origins import analyse

    cancel, progress = _worker["cancel"], _worker["progress"]
    return analyse(start, outcome, settings, include=include, columns=columns,
                   progress=lambda done, total, stage: progress.put((done, total, stage)),
                   cancelled=cancel.is_set)


class AnalysisProcess:
    """:func:`basinmark.core.origins.analyse` run in a worker process, called like it (from any thread but the one
    that must keep turning: the call waits for the result)."""

    def __init__(self) -> None:
        self._lock = threading.Lock()   # one analysis at a time
        self._pool: cf.ProcessPoolExecutor | None = None
        self._cancel = None
        self._progress = None

    def _start(self) -> cf.ProcessPoolExecutor:
        from basinmark.core.process_context import worker_context

        ctx = worker_context()
        self._cancel, self._progress = ctx.Event(), ctx.Queue()
        self._pool = cf.ProcessPoolExecutor(max_workers=1, mp_context=ctx, initializer=_start_worker,
                                            initargs=(self._cancel, self._progress, os.getpid()))
        return self._pool

    def _drain(self, progress: Callable[[int, int, str], None] | None) -> None:
        while True:
            try:
                item = self._progress.get_nowait()
            except queue_mod.Empty:
                return
            if progress is not None:
                progress(*item)

    def analyse(self, start: StartingConditions, outcome: Mapping[str, str], settings=None,
                include: Sequence[str] | None = None, columns: Sequence[str] | None = None,
                progress: Callable[[int, int, str], None] | None = None,
                cancelled: Callable[[], bool] | None = None):
        """As :func:`basinmark.core.origins.analyse`; ``progress`` is called on the calling thread."""
        with self._lock:
            pool = self._pool or self._start()
            self._cancel.clear()
            self._drain(None)   # a cancelled analysis's last fits are not this one's
            try:
                future = pool.submit(_analyse_in_worker, start, dict(outcome), settings,
                                     None if include is None else tuple(include),
                                     None if columns is None else tuple(columns))
                while True:
                    try:
                        result = future.result(timeout=POLL_S)
                    except cf.TimeoutError:
                        self._drain(progress)
                        if cancelled is not None and cancelled():
                            self._cancel.set()
                        continue
                    self._drain(progress)
                    return result
            except BrokenProcessPool:
                self._pool = None   # a new one for the next analysis
                raise OriginsError("the analysis's worker process ended before the analysis did (out of memory, "
                                   "or killed); analyse again to start a new one") from None

    def close(self) -> None:
        """Stop the running analysis (after its current fit) and let the process end."""
        pool, self._pool = self._pool, None
        if pool is not None:
            self._cancel.set()
            pool.shutdown(wait=False, cancel_futures=True)


_shared: AnalysisProcess | None = None
_shared_lock = threading.Lock()


def shared_process() -> AnalysisProcess:
    """The program's one analysis process (started at its first analysis)."""
    global _shared
    with _shared_lock:
        if _shared is None:
            _shared = AnalysisProcess()
        return _shared
