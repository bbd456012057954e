"""Generate a demo set: quasiclassical runs on the model surface, written as gzipped extended XYZ.

``generate(out_dir, runs=200, seed=...)`` is deterministic for a seed: same bytes every time on the
same numpy (gzip header mtime is 0, no file name is stored).  Each run is two halves started at the
transition state, ``runs/<run>.bwd.xyz.gz`` (velocities reversed; negative times) and
``runs/<run>.fwd.xyz.gz``, with comment keys ``time`` (fs), ``epot`` and ``ekin`` (eV; potential
energy zero at the transition state).  ``basins.toml`` and ``README.md`` are written beside them.

The end-point check here (:func:`region_track`) only serves the generator: it stops a half once
it has stayed in one region long enough and it summarises what ended where.  Classifying the set
is the job of the rules file and the classifier.
"""

from __future__ import annotations

import gzip
import io
from collections import Counter
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Callable

import numpy as np

from basinmark.demo.integrate import velocity_verlet
from basinmark.demo.phase_set import PhaseSettings, finish_phase_set, phase_readme, phase_start, ts_modes
from basinmark.demo.sampling import find_saddle, landmarks, normal_modes, quasiclassical
from basinmark.demo.scenario import basins_toml, manifest_text, readme_text
from basinmark.demo.surface import PAIR_A, PAIR_B, PAIR_C, SYMBOLS, Surface
from basinmark.core.errors import SetError
from basinmark.core.manifest import MANIFEST_NAME
from basinmark.core.units import energy_factor

#: region thresholds (Å) shared by the stop test and the bundled rules file
REACTANT_A_ABOVE = 2.75
PRODUCT_A_BELOW = 2.0
BOND_BELOW = 1.95
SPECTATOR_ABOVE = 2.25
REGION_NAMES = ("reactant", "alpha", "beta")

DEFAULT_SEED = 20261204


@dataclass(frozen=True)
class DemoSettings:
    """How the runs are made (fs, K)."""

    temperature: float = 298.15
    dt_fs: float = 0.2
    max_time_fs: float = 400.0  # per half
    save_every_fs: float = 4.0
    stop_dwell_fs: float = 120.0  # a half stops after this long in one region
    #: runs (0-based) integrated with a coarse time step, as a careless setting would: the set then
    #: holds a couple of runs whose total energy drifts, which the energy check should catch
    coarse_runs: tuple[int, ...] = (57, 143)
    coarse_dt_fs: float = 1.0


@dataclass
class GenerateSummary:
    """What the generator made, and where its own end-point check says each half ended."""

    out_dir: Path
    runs: int
    seed: int
    settings: DemoSettings
    ends: dict[str, tuple[str, str]] = field(default_factory=dict)  # run -> (backward end, forward end)
    max_drift_ev: dict[str, float] = field(default_factory=dict)
    bytes_written: int = 0
    #: phase-decided sets only: the deciding mode (numbered from 1), each run's phase of it (rad, as
    #: basinmark.core.modes.project computes it from the written t = 0 frame) and the arc of phases giving
    #: alpha, (start, width, share of the finished product runs it predicts), from phase_set.best_arc
    decide_mode: int | None = None
    phases: dict[str, float] = field(default_factory=dict)
    arc: tuple[float, float, float] | None = None

    def outcome(self, run: str) -> str:
        """Our own rough reading of a run's two ends (for the report only)."""
        b, f = self.ends[run]
        if "none" in (b, f):
            return "unfinished"
        if b == f:
            return "recrossing"
        if "reactant" in (b, f):
            return f if b == "reactant" else b
        return "product-to-product"

    def counts(self) -> Counter:
        return Counter(self.outcome(r) for r in self.ends)

    def report_lines(self, with_folder: bool = True) -> list[str]:
        c = self.counts()
        kcal = energy_factor("kcal/mol")
        drift = np.array(list(self.max_drift_ev.values())) / kcal
        where = f" to {self.out_dir}" if with_folder else ""
        lines = [f"{self.runs} runs written{where} ({self.bytes_written / 1e6:.2f} MB), seed {self.seed},"
                 f" T = {self.settings.temperature:g} K"]
        for key in ("alpha", "beta", "recrossing", "unfinished", "product-to-product"):
            if c.get(key):
                lines.append(f"  {key:<20}{c[key]:>5}")
        reactive = c.get("alpha", 0) + c.get("beta", 0)
        if reactive:
            lines.append(f"  alpha share of reactive runs: {c.get('alpha', 0) / reactive:.0%} of {reactive}"
                         " (generator's own end-point check, not a classification)")
        if reactive < 30:
            lines.append(f"  warning: only {reactive} reactive runs; any ratio from so few runs is very uncertain")
        bad = int(np.sum(drift > 1.0))
        lines.append(f"  largest total-energy drift {drift.max():.2f} kcal/mol; {bad} runs drift more than 1 kcal/mol")
        return lines


RECORD_NAME = "generator-record.csv"


def write_record(summary: GenerateSummary, path: Path) -> None:
    """The generator's own record of where each half ended (its regions of the surface it made), one row
    per run, so that classification of the set can be checked against what the generator knows."""
    kcal = energy_factor("kcal/mol")
    extra = summary.decide_mode is not None
    lines = ["run,backward_end,forward_end,outcome,max_drift_kcal_mol" + (",decide_mode,phase_rad" if extra else "")]
    for run, (b, f) in summary.ends.items():
        row = f"{run},{b},{f},{summary.outcome(run)},{summary.max_drift_ev[run] / kcal:.4f}"
        if extra:
            row += f",{summary.decide_mode},{summary.phases[run]:.6f}"
        lines.append(row)
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")


def region_track(positions: np.ndarray) -> np.ndarray:
    """Region index per frame for positions ``(..., N, 3)``: -1 none, else index into REGION_NAMES."""
    def dist(p):
        return np.linalg.norm(positions[..., p[0], :] - positions[..., p[1], :], axis=-1)

    a, b, c = dist(PAIR_A), dist(PAIR_B), dist(PAIR_C)
    region = np.full(a.shape, -1, dtype=int)
    region[a > REACTANT_A_ABOVE] = 0
    region[(a < PRODUCT_A_BELOW) & (b < BOND_BELOW) & (c > SPECTATOR_ABOVE)] = 1
    region[(a < PRODUCT_A_BELOW) & (c < BOND_BELOW) & (b > SPECTATOR_ABOVE)] = 2
    return region


def _stop_test(runs: int, dwell_steps: int):
    current = np.full(runs, -2)
    since = np.zeros(runs, dtype=int)

    def stop(step: int, x: np.ndarray, active: np.ndarray) -> np.ndarray:
        region = region_track(x)
        changed = region != current[active]
        current[active] = region
        since[active[changed]] = step
        return (region >= 0) & (step - since[active] >= dwell_steps)

    return stop


def format_frames(symbols: list[str], positions: np.ndarray, times: np.ndarray, epot: np.ndarray,
                  ekin: np.ndarray, velocities: np.ndarray | None = None) -> str:
    """Extended XYZ text, 4 decimals in Å and 5 in eV (small files; ase.io.read reads it back).

    With ``velocities`` (F, N, 3) in Å/fs, a ``vel`` column (6 decimals) follows the positions.
    Written by hand rather than with ``ase.io.write``: that writer prints 8 decimals, which
    roughly doubles the size of the bundled set for precision nobody can see.
    """
    n = len(symbols)
    out = io.StringIO()
    sym = [f"{s:<2}" for s in symbols]
    props = "species:S:1:pos:R:3" + (":vel:R:3" if velocities is not None else "")
    for f, (x, t, ep, ek) in enumerate(zip(positions, times, epot, ekin)):
        out.write(f"{n}\n")
        out.write(f'Properties={props} time={t:.2f} epot={ep:.5f} ekin={ek:.5f} pbc="F F F"\n')
        if velocities is None:
            for s, (px, py, pz) in zip(sym, x):
                out.write(f"{s} {px:9.4f} {py:9.4f} {pz:9.4f}\n")
        else:
            for s, (px, py, pz), (vx, vy, vz) in zip(sym, x, velocities[f]):
                out.write(f"{s} {px:9.4f} {py:9.4f} {pz:9.4f} {vx:10.6f} {vy:10.6f} {vz:10.6f}\n")
    return out.getvalue()


def write_gzip(path: Path, text: str) -> int:
    """Write ``text`` gzip-compressed with a fixed header (mtime 0, no name): same bytes every time."""
    buf = io.BytesIO()
    with gzip.GzipFile(filename="", mode="wb", fileobj=buf, compresslevel=9, mtime=0) as gz:
        gz.write(text.encode("ascii"))
    data = buf.getvalue()
    path.write_bytes(data)
    return len(data)


_LANDMARKS: dict = {}


def _stationary_points(surface: Surface):
    """Saddle, its modes and the minima, computed once per set of surface parameters in a process."""
    key = surface.params
    if key not in _LANDMARKS:
        saddle = find_saddle(surface)
        modes = normal_modes(surface, saddle)
        _LANDMARKS[key] = (saddle, modes, landmarks(surface, saddle, modes))
    saddle, modes, points = _LANDMARKS[key]
    return saddle.copy(), modes, {k: v.copy() for k, v in points.items()}


def generate(out_dir, runs: int = 200, seed: int = DEFAULT_SEED, temperature: float = 298.15,
             progress: Callable[[int, int], None] | None = None, *, settings: DemoSettings | None = None,
             surface: Surface | None = None, velocities: bool = False,
             phase: PhaseSettings | None = None) -> GenerateSummary:
    """Make a demo set of ``runs`` runs in ``out_dir`` (created; existing run files are overwritten).

    ``velocities``: write each frame's velocities (Å/fs) as a ``vel`` column.  ``phase``: make a set whose
    outcome is decided by one mode's starting phase (:mod:`basinmark.demo.phase_set`; velocities are then
    always written, the TS's modes go beside the set as ``ts-modes.toml``, the deliberately coarse runs are
    left out, and ``temperature`` is not used).
    """
    if runs < 1:
        raise ValueError("runs must be at least 1")
    settings = replace(settings or DemoSettings(), temperature=float(temperature))
    if phase is not None:
        settings = replace(settings, coarse_runs=())
        velocities = True
    surface = surface or Surface()
    out = Path(out_dir)
    for folder in (out, out / "runs"):
        if folder.exists() and not folder.is_dir():
            raise SetError(f"{folder}: exists and is not a folder; choose another place for the demo set")
    (out / "runs").mkdir(parents=True, exist_ok=True)

    saddle, modes, points = _stationary_points(surface)
    e_ts = float(surface.energy(saddle))
    rng = np.random.default_rng(seed)
    if phase is None:
        start = quasiclassical(modes, saddle, runs, settings.temperature, rng)
    else:
        ts = ts_modes(surface, saddle)
        start, decide = phase_start(ts, runs, rng, phase)

    save_every = max(1, int(round(settings.save_every_fs / settings.dt_fs)))
    dwell_steps = int(round(settings.stop_dwell_fs / settings.dt_fs))
    summary = GenerateSummary(out_dir=out, runs=runs, seed=seed, settings=settings)
    halves = {}
    total_steps = 2
    for done, (name, sign) in enumerate((("bwd", -1.0), ("fwd", 1.0))):
        halves[name] = velocity_verlet(surface, start.positions, sign * start.velocities, dt=settings.dt_fs,
                                       max_time=settings.max_time_fs, save_every=save_every,
                                       stop=_stop_test(runs, dwell_steps))
        coarse = [k for k in settings.coarse_runs if k < runs]
        if coarse:
            redo = velocity_verlet(surface, start.positions[coarse], sign * start.velocities[coarse],
                                   dt=settings.coarse_dt_fs, max_time=settings.max_time_fs,
                                   save_every=max(1, int(round(settings.save_every_fs / settings.coarse_dt_fs))),
                                   stop=_stop_test(len(coarse), int(round(settings.stop_dwell_fs
                                                                          / settings.coarse_dt_fs))))
            for j, k in enumerate(coarse):
                for part in ("positions", "times", "potential", "kinetic", "velocities"):
                    getattr(halves[name], part)[k] = getattr(redo, part)[j]
        if progress is not None:
            progress(done + 1, total_steps + 1)

    width = max(4, len(str(runs)))
    starts_x, starts_v = [], []
    for k in range(runs):
        run_id = f"run-{k + 1:0{width}d}"
        ends = []
        drift = 0.0
        for name, sign in (("bwd", -1.0), ("fwd", 1.0)):
            h = halves[name]
            times = sign * h.times[k] + 0.0  # + 0.0 turns -0.0 into 0.0
            epot = h.potential[k] - e_ts
            # the backward half was propagated with reversed velocities: the file gets the true dx/dt
            vel = sign * h.velocities[k] if velocities else None
            text = format_frames(SYMBOLS, h.positions[k], times, epot, h.kinetic[k], vel)
            summary.bytes_written += write_gzip(out / "runs" / f"{run_id}.{name}.xyz.gz", text)
            region = region_track(h.positions[k])[-1]
            ends.append(REGION_NAMES[region] if region >= 0 else "none")
            total = h.potential[k] + h.kinetic[k]
            drift = max(drift, float(np.max(np.abs(total - total[0]))))
        summary.ends[run_id] = (ends[0], ends[1])
        summary.max_drift_ev[run_id] = drift
        fwd = halves["fwd"]
        starts_x.append(np.round(fwd.positions[k][0], 4))  # the t = 0 frame as written (4 and 6 decimals)
        starts_v.append(np.round(fwd.velocities[k][0], 6))
    if phase is not None:
        finish_phase_set(summary, ts, decide, np.array(starts_x), np.array(starts_v), out)
    write_record(summary, out / RECORD_NAME)
    (out / MANIFEST_NAME).write_text(manifest_text("ringfork", settings.temperature), encoding="utf-8")
    (out / "basins.toml").write_text(
        basins_toml(REACTANT_A_ABOVE, PRODUCT_A_BELOW, BOND_BELOW, SPECTATOR_ABOVE), encoding="utf-8")
    energies = {k: float(surface.energy(x)) - e_ts for k, x in points.items()}
    readme = readme_text(energies, -float(modes.wavenumbers[0]), runs, seed, settings.temperature,
                         summary.report_lines(with_folder=False))
    if phase is not None:
        readme += phase_readme(summary, ts, phase)
    elif velocities:
        readme += "\nEvery frame also carries the atoms' velocities (Å/fs) in a `vel` column.\n"
    (out / "README.md").write_text(readme, encoding="utf-8")
    if progress is not None:
        progress(total_steps + 1, total_steps + 1)
    return summary
