"""A generated set for the Dask and per-run tests: runs built from random sequences of basin states (the
constructed geometry of tests/test_classify.py), written as gzipped backward and forward halves with time and
energy keys, plus one run whose forward half is damaged at a known line and one run of other atoms."""

from __future__ import annotations

import gzip
from pathlib import Path

import numpy as np

from tests.test_classify import A, B, N, R, place

STATES = (R, A, B, N)
DAMAGED = "run-0900"
OTHER_ATOMS = "run-0901"


def _half_text(pos: np.ndarray, times: np.ndarray, epot: np.ndarray, symbols: list[str]) -> str:
    lines = []
    for i in range(times.size):
        lines.append(f"{len(symbols)}\ntime={float(times[i])!r} epot={float(epot[i])!r} ekin=0.5")
        lines += [f"{s} {x:.6f} {y:.6f} {z:.6f}" for s, (x, y, z) in zip(symbols, pos[i])]
    return "\n".join(lines) + "\n"


def _write(path: Path, text: str) -> None:
    with gzip.GzipFile(path, "wb", mtime=0) as fh:
        fh.write(text.encode("ascii"))


def write_run(folder: Path, run_id: str, states, changes, rng, n_atoms: int = 9, dt: float = 2.0) -> None:
    """One run in ``folder``: state ``states[k]`` from time ``changes[k]`` fs on (the first from the start)."""
    t = np.arange(-200.0, 200.0 + dt / 2, dt)
    vals = np.empty((t.size, 3))
    for start, state in zip(changes, states):
        vals[t >= start - 1e-9] = state
    pos = place(*vals.T)[:, :n_atoms] + rng.normal(scale=1e-3, size=(t.size, n_atoms, 3))
    epot = -10.0 + np.cumsum(rng.normal(scale=0.0015, size=t.size))  # some runs drift past the flag's limit
    symbols = ["C"] * n_atoms
    ts = int(np.flatnonzero(t == 0)[0])
    _write(folder / f"{run_id}.bwd.xyz.gz", _half_text(pos[ts::-1], t[ts::-1], epot[ts::-1], symbols))
    _write(folder / f"{run_id}.fwd.xyz.gz", _half_text(pos[ts:], t[ts:], epot[ts:], symbols))


def write_generated_set(root: Path, n_runs: int, rules_text: str, seed: int = 7) -> dict:
    """The set in ``root``: ``n_runs`` random runs, the damaged run and the run of other atoms.  Returns the
    damaged file and the line of its damage."""
    rng = np.random.default_rng(seed)
    runs = root / "runs"
    runs.mkdir(parents=True, exist_ok=True)
    (root / "basins.toml").write_text(rules_text, encoding="utf-8")
    for k in range(n_runs):
        n = int(rng.integers(2, 5))
        states = [STATES[i] for i in rng.integers(0, len(STATES), size=n)]
        changes = [-1e9] + sorted(rng.uniform(-190, 190, size=n - 1).round(0).tolist())
        write_run(runs, f"run-{k + 1:04d}", states, changes, rng)
    write_run(runs, DAMAGED, [R, N, A], [-1e9, -40, 30], rng)
    write_run(runs, OTHER_ATOMS, [R, N, A], [-1e9, -40, 30], rng, n_atoms=8)  # too few for the rules, and left out
    bad = runs / f"{DAMAGED}.fwd.xyz.gz"
    lines = gzip.decompress(bad.read_bytes()).decode().splitlines()
    line = 3 * 11 + 4  # frame 4, its third atom (11 lines a frame: count, comment, 9 atoms)
    lines[line - 1] = "C 1.0 not-a-number 2.0"
    _write(bad, "\n".join(lines) + "\n")
    return {"damaged": bad, "line": line}
