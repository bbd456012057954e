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
