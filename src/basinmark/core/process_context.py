"""The multiprocessing context of the loader's process pool: workers that never run the caller's script.

The standard library's forkserver and spawn workers import the caller's main script again (as ``__mp_main__``)
so that functions defined there can be unpickled.  basinmark's workers run only basinmark's own functions, and a
chemist's plain script that opens a set at its top level (no ``if __name__ == "__main__":`` guard) would
otherwise run again in every worker: its side effects repeated, and its own open of the set starting a pool
inside a worker, which the standard library refuses, so every worker died and the open failed
(tests/test_sets_script.py).  The standard library offers no option for this, hence the narrow hook below:
while one of *our* workers is being started (a flag of the starting thread), the preparation data sent to the
child leaves out the main module; every other process, of this program or of the caller's, is untouched.
"""

from __future__ import annotations

import multiprocessing as mp
import os
import sys
import threading
from multiprocessing import context as mp_context
from multiprocessing import spawn

_starting = threading.local()
_MAIN_KEYS = ("init_main_from_path", "init_main_from_name")
_lock = threading.Lock()


def _install_hook() -> None:
    """Wrap ``multiprocessing.spawn.get_preparation_data`` once: without our flag it is the original."""
    with _lock:
        if getattr(spawn.get_preparation_data, "_basinmark", False):
            return
        original = spawn.get_preparation_data

        def get_preparation_data(name):
            data = original(name)
            if getattr(_starting, "active", False):
                for key in _MAIN_KEYS:
                    data.pop(key, None)
            return data

        get_preparation_data._basinmark = True
        spawn.get_preparation_data = get_preparation_data


def _popen_without_main(base_popen, process_obj):
    _install_hook()
    _starting.active = True
    try:
        return base_popen(process_obj)
    finally:
        _starting.active = False


class _ForkServerWorker(mp_context.ForkServerProcess if hasattr(mp_context, "ForkServerProcess") else object):
    @staticmethod
    def _Popen(process_obj):
        from multiprocessing.popen_forkserver import Popen
        return _popen_without_main(Popen, process_obj)


class _SpawnWorker(mp_context.SpawnProcess):
    @staticmethod
    def _Popen(process_obj):
        if sys.platform == "win32":  # pragma: no cover - Windows
            from multiprocessing.popen_spawn_win32 import Popen
        else:
            from multiprocessing.popen_spawn_posix import Popen
        return _popen_without_main(Popen, process_obj)


#: how much lower the workers' scheduling priority is than the caller's (``os.nice``): a window opening a set
#: keeps its share of a core while the workers take every core (on 2 cores, 2 workers at the same priority left
#: the window's thread two thirds of a core: the first paint and the end of a load took 1.5x longer).  Nothing
#: is lost when the machine is otherwise idle.  Our choice; 5 gives the caller about 3x a worker's weight.
WORKER_NICE = 5


def lower_priority(caller: int | None = None) -> None:
    """The pool's initializer: this worker yields the processor to the caller's threads when both want it, and
    ends when the caller (process id ``caller``) ends (:func:`end_with`)."""
    try:
        os.nice(WORKER_NICE)
    except (AttributeError, OSError):  # no nice on this system, or not allowed: the same priority is fine
        pass
    if caller is not None:
        end_with(caller)


#: how often (s) a worker looks whether its caller still runs, where the system cannot tell it at once
CALLER_POLL_S = 0.5


def end_with(caller: int) -> None:
    """End this worker when process ``caller`` ends, from a watching thread.

    The standard library's workers wait for their next task for ever, so a window killed or crashed during a load
    left its workers (and their fork server) running (tests/test_pool_orphans.py).  On Linux the thread sleeps on a
    process descriptor of the caller, which becomes readable when the caller ends; elsewhere it looks every
    :data:`CALLER_POLL_S`.  The worker then ends at once: its results have nobody to go to.  Not on Windows, where
    ``os.kill(pid, 0)`` would end the caller instead of asking after it."""
    if sys.platform == "win32":  # pragma: no cover - Windows
        return

    def watch() -> None:
        try:
            fd = os.pidfd_open(caller)
        except (AttributeError, OSError):
            fd = None
        if fd is not None:
            import select

            select.select([fd], [], [])
        else:
            import time

            while _running(caller):
                time.sleep(CALLER_POLL_S)
        os._exit(0)

    threading.Thread(target=watch, name="basinmark-caller-watch", daemon=True).start()


def _running(pid: int) -> bool:
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except OSError:  # exists, but ours to signal or not: still running
        return True
    return True


#: what the fork server imports once for every worker it forks (the readers).  One fork server serves the whole
#: program, and the first pool to start it decides what it preloads, so every pool asks for the same list
PRELOAD = ["basinmark.core.sets", "basinmark.core.io"]


def worker_context(preload: list[str] = PRELOAD):
    """Workers forked from a small server process that has imported ``preload`` once (not from the caller,
    which may be a window with threads of its own, where forking is unsafe); spawned where there is none.
    Either way the caller's main script is not imported in them."""
    if "forkserver" in mp.get_all_start_methods():
        base = mp.get_context("forkserver")
        ctx = type("BasinmarkForkServerContext", (type(base),), {"Process": _ForkServerWorker})()
        ctx.set_forkserver_preload(preload)
        return ctx
    base = mp.get_context("spawn")
    return type("BasinmarkSpawnContext", (type(base),), {"Process": _SpawnWorker})()
