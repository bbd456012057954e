"""A user's plain Python script that opens a set at its top level, with no ``if __name__ == "__main__":`` guard.

The process pool's workers used to import the caller's script again (the standard library does so to find
functions defined there): the script's top-level code ran once more in every worker, its open of the set tried
to start a pool from inside a worker, the workers died and the open failed with BrokenProcessPool.  The workers
run only basinmark's own functions, so they must never run the caller's script."""

from __future__ import annotations

import os
import subprocess
import sys
import textwrap
from pathlib import Path

from tests.test_sets import write_run

REPO = Path(__file__).resolve().parents[1]


def test_unguarded_script_opens_a_set_in_processes_and_runs_once(tmp_path):
    root = tmp_path / "set"
    for i in range(6):
        write_run(root / "runs", f"run-{i + 1:04d}", n_bwd=4, n_fwd=5)
    marks = tmp_path / "marks.txt"
    script = tmp_path / "count_runs.py"
    script.write_text(textwrap.dedent(f"""
        from basinmark.core.sets import open_set
        with open({str(marks)!r}, "a") as fh:
            fh.write("top level ran\\n")
        tset = open_set({str(root)!r}, use_cache=False, processes=True, workers=2)
        print("runs", len(tset.runs))
    """))
    env = dict(os.environ, PYTHONPATH=os.pathsep.join([str(REPO / "src"), str(REPO)]))
    done = subprocess.run([sys.executable, str(script)], capture_output=True, text=True, timeout=120,
                          cwd=tmp_path, env=env)
    assert done.returncode == 0, done.stderr[-3000:]
    assert "runs 6" in done.stdout
    assert marks.read_text().splitlines() == ["top level ran"]  # never again in a worker
