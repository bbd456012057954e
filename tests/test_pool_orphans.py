"""The pool's workers end when the program that started them ends, however it ends.

The standard library's workers wait for their next task for ever: a window killed (or crashed) in the middle of a
load or of the background check of its files left its workers and their server process behind, holding memory,
until someone killed them by hand (seen: two workers, the fork server and the resource tracker still there
minutes after their program died)."""

from __future__ import annotations

import os
import subprocess
import sys
import textwrap
import time
from pathlib import Path

from tests.test_sets import write_run

REPO = Path(__file__).resolve().parents[1]


def _alive(pid: int) -> bool:
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    try:   # a zombie (ended, not yet reaped by its parent) has ended
        with open(f"/proc/{pid}/stat") as fh:
            return fh.read().split(")")[-1].split()[0] != "Z"
    except OSError:
        return False


def test_workers_end_when_their_program_is_killed_mid_task(tmp_path):
    root = tmp_path / "set"
    for i in range(4):
        write_run(root / "runs", f"run-{i + 1:04d}", n_bwd=3, n_fwd=3)
    pids = tmp_path / "pids.txt"
    script = tmp_path / "dies.py"
    script.write_text(textwrap.dedent(f"""
        import os, time
        from basinmark.core import sets

        def stuck(_):
            time.sleep(60)   # a task still under way when the program dies

        pool = sets._new_pool(2)
        futures = [pool.submit(os.getpid) for _ in range(8)]
        workers = sorted({{f.result() for f in futures}})
        with open({str(pids)!r}, "w") as fh:
            fh.write(" ".join(map(str, workers)))
        pool.submit(time.sleep, 60)
        time.sleep(0.3)
        os._exit(3)   # as a crash or a kill would: no clean-up at all
    """))
    env = dict(os.environ, PYTHONPATH=str(REPO / "src"))
    errors = tmp_path / "stderr.txt"
    with open(errors, "w") as err:   # not a pipe: workers left behind would hold it open, and the wait with it
        done = subprocess.run([sys.executable, str(script)], env=env, timeout=120, stdout=subprocess.DEVNULL,
                              stderr=err)
    assert done.returncode == 3, errors.read_text()
    workers = [int(p) for p in pids.read_text().split()]
    assert workers
    deadline = time.monotonic() + 10
    while time.monotonic() < deadline and any(_alive(p) for p in workers):
        time.sleep(0.1)
    left = [p for p in workers if _alive(p)]
    for p in left:
        os.kill(p, 9)
    assert not left, f"workers {left} still running after their program died"


def test_without_process_descriptors_the_worker_looks_every_half_second(tmp_path):
    """Where the system has no process descriptors (other than Linux), the watching thread asks after the caller
    every CALLER_POLL_S; the worker ends soon after the caller."""
    script = tmp_path / "watch.py"
    script.write_text(textwrap.dedent("""
        import os, subprocess, sys, threading, time
        del os.pidfd_open   # as on a system without them
        from basinmark.core import process_context
        caller = subprocess.Popen([sys.executable, "-c", "import time; time.sleep(0.5)"])
        threading.Thread(target=caller.wait, daemon=True).start()   # reaped when it ends, as a shell would
        process_context.end_with(caller.pid)
        time.sleep(20)
        print("still here")
    """))
    env = dict(os.environ, PYTHONPATH=str(REPO / "src"))
    started = time.monotonic()
    done = subprocess.run([sys.executable, str(script)], env=env, timeout=60, capture_output=True, text=True)
    assert done.returncode == 0 and "still here" not in done.stdout, done.stderr
    assert time.monotonic() - started < 15


def test_running_tells_a_live_process_from_an_ended_one():
    from basinmark.core.process_context import _running

    assert _running(os.getpid())
    ended = subprocess.Popen([sys.executable, "-c", "pass"])
    ended.wait()
    assert not _running(ended.pid)
