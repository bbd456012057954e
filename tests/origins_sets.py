"""Small made-up sets whose outcome is a known function of one starting coordinate (for the origins tests).

Four atoms A-B-C-D.  Each run starts at t = 0 near the same geometry (random displacement, ``spread`` Å) with
random atom velocities; for |t| ≤ 4 fs the atoms move in straight lines (so a difference over the frames next
to t = 0 gives the exact velocity), then each run glides to the reactant end (backward) and to product
``alpha`` or ``beta`` (forward).  Which product is decided by ``decide(x0, v0)``; by default the sign of the
rate of change of the B–C distance at t = 0.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np

from basinmark.core.model import Trajectory, TrajectorySet

SYMBOLS = ["C", "C", "C", "H"]
BASE = np.array([[0.0, 0.0, 0.0], [1.5, 0.0, 0.0], [3.0, 0.0, 0.0], [3.0, 2.2, 0.0]])
REACTANT_END = np.array([[0.0, 0.0, 0.0], [1.5, 0.0, 0.0], [3.0, 0.0, 0.0], [3.0, 3.5, 0.0]])
ALPHA_END = np.array([[0.2, 0.0, 0.0], [1.5, 0.0, 0.0], [3.0, 0.0, 0.0], [3.0, 1.5, 0.0]])
BETA_END = np.array([[-1.0, 0.0, 0.0], [1.5, 0.0, 0.0], [3.0, 0.0, 0.0], [3.0, 1.5, 0.0]])
MONITORS = {"r_ab": (0, 1), "r_bc": (1, 2), "r_cd": (2, 3)}  # 0-based

RULES = """name = "toy"
reactant = "reactant"
dwell_fs = 10.0

[monitors]
r_ab = [1, 2]
r_bc = [2, 3]
r_cd = [3, 4]

[basins.reactant]
r_cd = { above = 2.6 }

[basins.alpha]
r_cd = { below = 1.8 }
r_ab = { below = 1.6 }

[basins.beta]
r_cd = { below = 1.8 }
r_ab = { above = 2.2 }
"""


def rate_bc(x0: np.ndarray, v0: np.ndarray) -> float:
    """d|x_C - x_B|/dt at t = 0 (analytic)."""
    d = x0[2] - x0[1]
    return float(np.dot(d, v0[2] - v0[1]) / np.linalg.norm(d))


def by_rate_bc(x0, v0) -> str:
    return "alpha" if rate_bc(x0, v0) > 0 else "beta"


def toy_runs(n: int = 80, seed: int = 1, decide=by_rate_bc, spread: float = 0.03, speed: float = 0.01,
             step_fs: float = 2.0, span_fs: float = 60.0, draw=None):
    """``[(run_id, times, positions (F, 4, 3), v0 (4, 3), outcome)]``; ``draw(rng) -> (x0, v0)`` replaces the
    default random start."""
    rng = np.random.default_rng(seed)
    times = np.arange(-span_fs, span_fs + step_fs / 2, step_fs)
    out = []
    for k in range(n):
        if draw is not None:
            x0, v0 = draw(rng)
        else:
            x0 = BASE + rng.normal(0, spread, BASE.shape)
            v0 = rng.normal(0, speed, BASE.shape)
        outcome = decide(x0, v0)
        end_f = ALPHA_END if outcome == "alpha" else BETA_END
        pos = np.empty((times.size, 4, 3))
        for i, t in enumerate(times):
            if abs(t) <= 4.0:
                pos[i] = x0 + v0 * t
            else:
                start = x0 + v0 * 4.0 * np.sign(t)
                end = end_f if t > 0 else REACTANT_END
                f = min(1.0, (abs(t) - 4.0) / 20.0)
                pos[i] = (1 - f) * start + f * end
        out.append((f"run-{k + 1:03d}", times, pos, v0, outcome))
    return out


def toy_set(n: int = 80, seed: int = 1, decide=by_rate_bc, **kw) -> tuple[TrajectorySet, dict[str, str]]:
    """An in-memory set (no files, so velocities are estimated) and its true outcomes."""
    runs = {}
    outcome = {}
    for rid, times, pos, _v0, o in toy_runs(n, seed, decide, **kw):
        runs[rid] = Trajectory(rid, Trajectory.numbers_from_symbols(SYMBOLS), pos, times)
        outcome[rid] = o
    return TrajectorySet(root=Path("/nonexistent-toy"), runs=runs), outcome


def write_toy_set(folder: Path, n: int = 40, seed: int = 1, decide=by_rate_bc, velocities: str | None = "vel",
                  **kw) -> dict[str, str]:
    """Joined run files (``runs/<run>.xyz``) with the rules; ``velocities`` names the per-atom velocity column
    written with every frame (None: no column).  Returns the true outcomes."""
    folder = Path(folder)
    (folder / "runs").mkdir(parents=True, exist_ok=True)
    (folder / "basins.toml").write_text(RULES, encoding="utf-8")
    outcome = {}
    for rid, times, pos, v0, o in toy_runs(n, seed, decide, **kw):
        outcome[rid] = o
        lines = []
        for i, t in enumerate(times):
            vel = v0 if abs(t) <= 4.0 else np.zeros_like(v0)  # only the t = 0 frame's values matter here
            props = "species:S:1:pos:R:3" + (f":{velocities}:R:3" if velocities else "")
            lines.append("4")
            lines.append(f"Properties={props} time={t:.3f}")
            for s, p, v in zip(SYMBOLS, pos[i], vel):
                extra = f" {v[0]:.8f} {v[1]:.8f} {v[2]:.8f}" if velocities else ""
                lines.append(f"{s} {p[0]:.6f} {p[1]:.6f} {p[2]:.6f}{extra}")
        (folder / "runs" / f"{rid}.xyz").write_text("\n".join(lines) + "\n", encoding="ascii")
    return outcome


# --- a set made by the demo generator, whose outcome follows one mode's starting phase ----------------------

#: enough runs for the claim (accuracy > 0.95 with the rarest product well above the too-few-runs limit), few
#: frames (100 fs halves) to keep it to seconds
PHASE_DEMO_RUNS = 160
PHASE_DEMO_ARGS = ["--max-time", "100", "--seed", "7"]


@dataclass
class PhaseDemo:
    root: Path
    runs: int
    mode: int  # the deciding mode, numbered from 1 as people see it
    outcomes: "pd.Series"  # the rules' classification, by run


def make_phase_demo(folder: Path, runs: int = PHASE_DEMO_RUNS) -> PhaseDemo:
    """``basinmark make-demo FOLDER --phase-decides`` (through the CLI) and what the generator says decides."""
    import pandas as pd

    from basinmark.cli import main
    from basinmark.core.classify import classify_set
    from basinmark.core.rules import load_rules
    from basinmark.core.sets import open_set, rules_path

    root = Path(folder) / "phase"
    assert main(["make-demo", str(root), "--runs", str(runs), "--phase-decides"] + PHASE_DEMO_ARGS) == 0
    record = pd.read_csv(root / "generator-record.csv")
    modes = set(record["decide_mode"])
    assert len(modes) == 1
    tset = open_set(root, use_cache=False)
    table = classify_set(tset, load_rules(rules_path(root), n_atoms=tset.n_atoms))
    return PhaseDemo(root, runs, int(modes.pop()), table.set_index("run")["outcome"])


def displace_start(folder: Path, run: str, dy: float = 2.0) -> None:
    """Move the hydrogen of ``run`` (written by :func:`write_toy_set`) by ``dy`` Å in every frame: a run that was
    not started at the others' transition state."""
    path = Path(folder) / "runs" / f"{run}.xyz"
    lines = []
    for line in path.read_text(encoding="ascii").splitlines():
        parts = line.split()
        if parts and parts[0] == "H":
            parts[2] = f"{float(parts[2]) + dy:.6f}"
            line = " ".join(parts)
        lines.append(line)
    path.write_text("\n".join(lines) + "\n", encoding="ascii")


#: 18 runs of seed 4: 8 alpha and 10 beta, so the rarest outcome has fewer than 10 runs (too few to mean much)
#: but more than the 5 folds (a classifier is still made)
FEW_RUNS = dict(n=18, seed=4)


def write_doubtful_set(folder: Path) -> dict[str, str]:
    """A set every honesty warning applies to: no velocity column (velocities estimated), one run started 2 Å
    away (not one transition state), and fewer than 10 runs of the rarer product."""
    outcome = write_toy_set(folder, velocities=None, **FEW_RUNS)
    displace_start(folder, "run-002")
    return outcome


def origins_window(qtbot, tmp_path: Path, root: Path, settings):
    """(window, Origins dock): a window with the Origins tab (analysing with ``settings``), on the set ``root``
    read from its files, fully loaded; the tab not yet shown."""
    from labeling_helpers import open_window

    from basinmark.gui.origins_view import install_origins_dock

    docks = []

    def install(w) -> None:
        docks.append(install_origins_dock(w))
        w.origins_panel.settings = settings

    w = open_window(qtbot, tmp_path, root, install=install, timeout_ms=60000)
    qtbot.waitUntil(lambda: not w.state.loading, timeout=60000)
    return w, docks[0]


def window_with_origins(qtbot, tmp_path: Path, settings, n: int = 30, seed: int = 2):
    """A window on a toy set (:func:`write_toy_set`) whose Origins tab, analysing with ``settings``, is brought to
    the front and has shown its result."""
    root = tmp_path / "toy"
    write_toy_set(root, n=n, seed=seed)
    w, dock = origins_window(qtbot, tmp_path, root, settings)
    with qtbot.waitSignal(w.origins_panel.updated, timeout=120000):
        dock.show()
        dock.raise_()
    w.origins_panel.wait(120)  # a refresh asked while the first ran
    return w
