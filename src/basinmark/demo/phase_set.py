"""Starting conditions for a demo set whose outcome is decided by one normal mode's starting phase.

The ordinary demo set starts quasiclassically: every mode gets its own random energy and phase, and which
product a run reaches depends on many of them at once.  This variant makes one cause dominate, so that the
tool's "why does a run go where it goes" analysis has a known answer to find:

* the **deciding mode** (by default the real mode that moves ``r_b − r_c`` most per unit of energy: the
  transverse motion that steers a run to one side of the ridge) gets a fixed energy and a random phase;
* the reaction coordinate (the imaginary mode) gets a fixed kinetic energy toward the products, so every
  run takes about the same time to reach the fork;
* every other mode gets only a small fraction of its zero-point energy, with a random phase.

A run then reaches *alpha* or *beta* according to where the deciding mode stands when the run reaches the
fork, that is by its starting phase: runs whose phase lies in one arc of the circle give alpha, the rest
beta.  The generator measures that arc on the runs it made (:func:`best_arc`) and writes it into the
set's README; the phases are those :func:`basinmark.core.modes.project` computes from the files' t = 0
frames (positions and the ``vel`` column) and the mode file written beside the set.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from basinmark.core.units import energy_factor
from basinmark.core.modes import AMU_A2_FS2, NormalModes, modes_from_hessian
from basinmark.demo.sampling import H_EV_FS, InitialConditions, hessian, remove_rigid_motion
from basinmark.demo.surface import PAIR_A, PAIR_B, PAIR_C, SYMBOLS, Surface

#: the mode file written beside a phase set
MODE_FILE_NAME = "ts-modes.toml"


@dataclass(frozen=True)
class PhaseSettings:
    """How a phase-decided set starts its runs (energies in kcal/mol)."""

    mode: int | None = None  #: deciding mode, numbered from 1 as people see it; None: chosen (see module)
    mode_energy: float = 3.0  #: energy of the deciding mode
    reaction_energy: float = 0.6  #: kinetic energy along the reaction coordinate, toward the products
    others_zpe_fraction: float = 0.1  #: share of its zero-point energy each other real mode gets


def ts_modes(surface: Surface, saddle: np.ndarray) -> NormalModes:
    """The transition state's normal modes through the core's own path (what a chemist's mode file gives)."""
    return modes_from_hessian(SYMBOLS, saddle, hessian(surface, saddle), masses=surface.masses,
                              source="demo surface")


def _distance_gradient(x: np.ndarray, pair) -> np.ndarray:
    i, j = pair
    d = x[i] - x[j]
    u = d / np.linalg.norm(d)
    g = np.zeros_like(x)
    g[i], g[j] = u, -u
    return g


def deciding_mode(modes: NormalModes) -> int:
    """0-based index of the real mode that changes ``r_b − r_c`` most for a given energy in it.

    For energy E a mode's amplitude is sqrt(2E)/ω, so the effect per unit energy is |∂(r_b − r_c)/∂Q| / ω.
    """
    x = modes.positions
    g = _distance_gradient(x, PAIR_B) - _distance_gradient(x, PAIR_C)
    cart = modes.modes / np.sqrt(modes.masses)[None, :, None]
    slope = np.abs(np.einsum("kni,ni->k", cart, g))
    effect = np.where(modes.imaginary, 0.0, slope / np.maximum(modes.angular_frequencies, 1e-12))
    return int(np.argmax(effect))


def phase_start(modes: NormalModes, runs: int, rng: np.random.Generator,
                settings: PhaseSettings) -> tuple[InitialConditions, int]:
    """Starting points at the saddle (``modes.positions``) and the 0-based deciding mode."""
    if modes.n_imaginary != 1:
        raise ValueError(f"expected one imaginary mode at the saddle, found {modes.n_imaginary}")
    kcal = energy_factor("kcal/mol")
    k = deciding_mode(modes) if settings.mode is None else settings.mode - 1
    if not 0 <= k < modes.n_modes or modes.imaginary[k]:
        raise ValueError(f"mode {k + 1} cannot decide the outcome: choose a real mode, 2 to {modes.n_modes}")
    omega = modes.angular_frequencies  # rad/fs
    zpe = 0.5 * H_EV_FS * omega / (2 * np.pi)  # eV
    m = modes.n_modes
    energy = np.tile(settings.others_zpe_fraction * zpe, (runs, 1))
    energy[:, k] = settings.mode_energy * kcal
    phase = rng.uniform(-np.pi, np.pi, size=(runs, m))
    amp = np.sqrt(2 * energy / AMU_A2_FS2)  # amu^1/2 Å/fs
    coord = amp / omega * np.cos(phase)
    mom = -amp * np.sin(phase)
    # reaction coordinate: at the saddle, moving toward the products (the side where the ring closes, r_a falls)
    ts = modes.imaginary.nonzero()[0][0]
    cart0 = modes.modes[ts] / np.sqrt(modes.masses)[:, None]
    toward = -np.sign(np.sum(_distance_gradient(modes.positions, PAIR_A) * cart0)) or 1.0
    coord[:, ts] = 0.0
    mom[:, ts] = toward * np.sqrt(2 * settings.reaction_energy * kcal / AMU_A2_FS2)
    energy[:, ts] = settings.reaction_energy * kcal
    inv_sqrt_m = 1 / np.sqrt(modes.masses)[None, :, None]
    x = modes.positions[None] + np.einsum("rm,mni->rni", coord, modes.modes) * inv_sqrt_m
    v = np.einsum("rm,mni->rni", mom, modes.modes) * inv_sqrt_m
    v = remove_rigid_motion(x, v, modes.masses)
    quanta = np.zeros((runs, m), dtype=int)
    quanta[:, ts] = -1
    return InitialConditions(positions=x, velocities=v, mode_energies=energy, quanta=quanta), k


def best_arc(phase: np.ndarray, is_first: np.ndarray, steps: int = 360) -> tuple[float, float, float]:
    """The arc of the circle ``[start, start + width)`` (rad) whose runs best match ``is_first``.

    Returns ``(start, width, accuracy)``: predicting "first" inside the arc and "other" outside is right for
    that share of the runs.  A plain grid search over start and width (``steps`` of each).
    """
    phase = np.mod(np.asarray(phase, float), 2 * np.pi)
    y = np.asarray(is_first, bool)
    grid = np.linspace(0, 2 * np.pi, steps, endpoint=False)
    offset = np.mod(phase[None, :] - grid[:, None], 2 * np.pi)  # (start, run)
    best = (0.0, 0.0, -1.0)
    for w in grid[1:]:
        acc = ((offset < w) == y[None, :]).mean(axis=1)
        i = int(np.argmax(acc))
        if acc[i] > best[2]:
            best = (float(grid[i]), float(w), float(acc[i]))
    return best


def finish_phase_set(summary, modes: NormalModes, decide: int, starts_x: np.ndarray, starts_v: np.ndarray,
                     out) -> None:
    """Write the mode file beside the set and fill ``summary``'s deciding mode, phases and arc.

    ``starts_x``/``starts_v`` are the runs' t = 0 frames as written to the files; their phases come from
    :func:`basinmark.core.modes.project` (alignment included), the way a user of the set would get them.
    """
    from pathlib import Path

    from basinmark.core.mode_projection import project_arrays
    from basinmark.core.modes import write_modes

    write_modes(Path(out) / MODE_FILE_NAME, modes,
                comment="Normal modes of the transition state of basinmark's invented demo surface, written by "
                        "basinmark make-demo.\nMass-weighted Hessian of the analytic forces at the saddle.")
    phase = project_arrays(modes, starts_x, starts_v)["phase"][:, decide]
    runs = list(summary.ends)
    summary.decide_mode = decide + 1
    summary.phases = {r: float(p) for r, p in zip(runs, phase)}
    outcome = np.array([summary.outcome(r) for r in runs])
    product = np.isin(outcome, ("alpha", "beta"))
    if product.sum() >= 2:
        summary.arc = best_arc(phase[product], outcome[product] == "alpha")


def phase_readme(summary, modes: NormalModes, settings: PhaseSettings) -> str:
    """The README section of a phase-decided set: what decides the outcome, and how well."""
    k = summary.decide_mode - 1
    lines = [
        "",
        "## This set: the outcome is decided by one mode's starting phase",
        "",
        f"Made with `--phase-decides`: {modes.label(k)} starts with {settings.mode_energy:g} kcal/mol at a random",
        f"phase, the reaction coordinate with {settings.reaction_energy:g} kcal/mol toward the products, and every",
        f"other mode with only {settings.others_zpe_fraction:.0%} of its zero-point energy (so this is not a",
        "quasiclassical set, and the temperature is not used). Every frame carries the atoms' velocities (Å/fs)",
        "in a `vel` column; the transition state's normal modes are in `ts-modes.toml` (docs/mode-file.md).",
        "`generator-record.csv` gives each run's phase of the deciding mode (`phase_rad`, as basinmark computes",
        "it from the t = 0 frame: atan2(−dQ/dt / ω, Q)).",
    ]
    if summary.arc is not None:
        start, width, acc = summary.arc
        end = np.mod(start + width, 2 * np.pi)
        lines += ["", f"Measured on these runs: alpha when that phase lies between {start:.2f} and {end:.2f} rad",
                  f"(counter-clockwise, angles taken in [0, 2π)), beta otherwise — right for {acc:.1%} of the runs",
                  "that reached a product."]
    return "\n".join(lines) + "\n"
