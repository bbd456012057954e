"""Saddle search, normal modes and quasiclassical initial conditions at the transition state.

Units: Å, eV, amu, fs.  Velocities are in Å/fs; kinetic energy is ``0.5 * m * v**2 * AMU_A2_FS2``.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from ase import units

from basinmark.demo.surface import Surface

#: eV per (amu Å^2 / fs^2)
AMU_A2_FS2 = units._amu * 1e10 / units._e  # 1 amu * (1 Å/fs)^2 in eV = 1.0364e2
KB_EV = units.kB  # eV/K
#: h in eV fs
H_EV_FS = units._hplanck / units._e * 1e15
#: cm^-1 per (1/fs) of ordinary frequency
INV_FS_TO_CM = 1e15 / (units._c * 100)


def hessian(surface: Surface, x: np.ndarray, step: float = 1e-3) -> np.ndarray:
    """Cartesian Hessian (eV/Å^2, 3N x 3N) by central differences of the analytic forces."""
    x = np.asarray(x, float)
    n = x.size
    disp = np.zeros((2 * n,) + x.shape)
    for k in range(n):
        disp[2 * k].flat[k] = step
        disp[2 * k + 1].flat[k] = -step
    _, f = surface.energy_forces(x[None] + disp)
    f = f.reshape(n, 2, n)
    h = -(f[:, 0] - f[:, 1]) / (2 * step)
    return 0.5 * (h + h.T)


def _rigid_basis(x: np.ndarray, masses: np.ndarray) -> np.ndarray:
    """Orthonormal mass-weighted translations and rotations, shape (6, 3N)."""
    sq = np.sqrt(masses)
    com = (masses[:, None] * x).sum(0) / masses.sum()
    r = x - com
    vecs = []
    for k in range(3):
        t = np.zeros_like(x)
        t[:, k] = 1.0
        vecs.append((t * sq[:, None]).ravel())
    for k in range(3):
        axis = np.zeros(3)
        axis[k] = 1.0
        vecs.append((np.cross(axis, r) * sq[:, None]).ravel())
    q, _ = np.linalg.qr(np.array(vecs).T)
    return q.T


@dataclass
class Modes:
    """Vibrational normal modes (translations and rotations removed)."""

    wavenumbers: np.ndarray  # (M,) cm^-1; imaginary ones as negative numbers
    eigenvalues: np.ndarray  # (M,) eV / (amu Å^2)
    vectors: np.ndarray  # (M, N, 3) mass-weighted, orthonormal
    masses: np.ndarray  # (N,) amu

    @property
    def n_imaginary(self) -> int:
        return int(np.sum(self.eigenvalues < 0))

    def angular(self) -> np.ndarray:
        """|omega| in rad/fs for each mode."""
        return np.sqrt(np.abs(self.eigenvalues) / AMU_A2_FS2)


def normal_modes(surface: Surface, x: np.ndarray, step: float = 1e-3) -> Modes:
    """Mass-weighted normal modes at ``x`` with the six rigid motions projected out."""
    x = np.asarray(x, float)
    masses = surface.masses
    h = hessian(surface, x, step)
    minv = 1 / np.sqrt(np.repeat(masses, 3))
    hw = h * minv[:, None] * minv[None, :]
    rigid = _rigid_basis(x, masses)
    proj = np.eye(x.size) - rigid.T @ rigid
    hw = proj @ hw @ proj
    vals, vecs = np.linalg.eigh(hw)
    # drop the six eigenvectors lying in the rigid subspace (their eigenvalues are ~0)
    overlap = np.linalg.norm(rigid @ vecs, axis=0)
    keep = overlap < 0.5
    vals, vecs = vals[keep], vecs[:, keep]
    omega = np.sqrt(np.abs(vals) / AMU_A2_FS2)  # rad/fs
    wn = np.sign(vals) * omega / (2 * np.pi) * INV_FS_TO_CM
    return Modes(wavenumbers=wn, eigenvalues=vals, vectors=vecs.T.reshape(-1, *x.shape), masses=masses)


def _rfo_shift(v: np.ndarray, g: np.ndarray) -> float:
    """Lowest root of lam = sum g^2 / (lam - v) below min(v), by bisection (the function is monotonic)."""
    hi = min(v[0], 0.0) - 1e-12
    lo = min(v[0], 0.0) - np.linalg.norm(g) - 1.0
    for _ in range(200):
        mid = 0.5 * (lo + hi)
        if mid - np.sum(g**2 / (mid - v)) > 0:
            hi = mid
        else:
            lo = mid
    return 0.5 * (lo + hi)


def find_saddle(surface: Surface, x0: np.ndarray | None = None, *, fmax: float = 1e-6,
                max_steps: int = 200, trust: float = 0.1, callback=None) -> np.ndarray:
    """First-order saddle point near ``x0`` by Newton steps that climb the lowest Hessian mode.

    Eigenvector following (partitioned rational-function steps, Banerjee et al., J. Phys.
    Chem. 89 (1985) 52, from memory) with a trust radius; raises RuntimeError if it does not converge.
    """
    x = np.array(surface.reference if x0 is None else x0, float)
    masses = surface.masses
    for _ in range(max_steps):
        _, f = surface.energy_forces(x)
        g = -f.ravel()
        if callback is not None:
            callback(x, float(np.abs(f).max()))
        if np.abs(f).max() < fmax:
            return x
        h = hessian(surface, x)
        rigid = _rigid_basis(x, np.ones_like(masses))
        proj = np.eye(x.size) - rigid.T @ rigid
        vals, vecs = np.linalg.eigh(proj @ h @ proj)
        keep = np.linalg.norm(rigid @ vecs, axis=0) < 0.5
        vals, vecs = vals[keep], vecs[:, keep]
        gq = vecs.T @ g
        step = np.zeros_like(gq)
        # climb along the lowest mode, descend along all others (P-RFO shifts)
        lam_up = 0.5 * vals[0] + 0.5 * np.sqrt(vals[0] ** 2 + 4 * gq[0] ** 2)
        step[0] = -gq[0] / (vals[0] - lam_up)
        rest_v, rest_g = vals[1:], gq[1:]
        lam = _rfo_shift(rest_v, rest_g)
        step[1:] = -rest_g / (rest_v - lam)
        dx = vecs @ step
        norm = np.linalg.norm(dx)
        if norm > trust:
            dx *= trust / norm
        x = x + dx.reshape(x.shape)
    raise RuntimeError(f"saddle search did not converge in {max_steps} steps (max force {np.abs(f).max():.2e} eV/Å)")


def remove_rigid_motion(x: np.ndarray, v: np.ndarray, masses: np.ndarray) -> np.ndarray:
    """Velocities ``(..., N, 3)`` with net linear and angular momentum removed (about the centre of mass)."""
    x = np.asarray(x, float)
    v = np.array(v, float)
    m = masses[:, None]
    mt = masses.sum()
    v -= (m * v).sum(-2, keepdims=True) / mt
    r = x - (m * x).sum(-2, keepdims=True) / mt
    ang = (m * np.cross(r, v)).sum(-2)  # (..., 3)
    rr = np.einsum("...ni,...ni->...n", r, r)
    inertia = (masses[:, None, None] * (rr[..., None, None] * np.eye(3)
                                        - r[..., :, None] * r[..., None, :])).sum(-3)
    omega = np.linalg.solve(inertia, ang[..., None])[..., 0]
    v -= np.cross(omega[..., None, :], r)
    return v


def kinetic_energy(v: np.ndarray, masses: np.ndarray) -> np.ndarray:
    """Kinetic energy (eV) of velocities ``(..., N, 3)`` in Å/fs."""
    return 0.5 * AMU_A2_FS2 * np.einsum("n,...ni,...ni->...", masses, v, v)


def harmonic_mean_energy(wavenumber: float | np.ndarray, temperature: float) -> np.ndarray:
    """Mean energy (eV) of a quantum harmonic oscillator at T: (n_bar + 1/2) h nu (Planck)."""
    hnu = H_EV_FS * np.asarray(wavenumber) / INV_FS_TO_CM
    if temperature <= 0:
        return 0.5 * hnu
    return hnu * (0.5 + 1.0 / np.expm1(hnu / (KB_EV * temperature)))


@dataclass
class InitialConditions:
    """Quasiclassical starting points at the saddle for several runs."""

    positions: np.ndarray  # (R, N, 3) Å
    velocities: np.ndarray  # (R, N, 3) Å/fs
    mode_energies: np.ndarray  # (R, M) eV given to each mode (mode 0: the reaction coordinate)
    quanta: np.ndarray  # (R, M) vibrational quantum numbers (-1 for the reaction coordinate)


def quasiclassical(modes: Modes, saddle: np.ndarray, runs: int, temperature: float,
                   rng: np.random.Generator) -> InitialConditions:
    """Quasiclassical initial conditions at a first-order saddle.

    Each real mode gets ``(n + 1/2) h nu`` with ``n`` drawn from the harmonic oscillator's
    Boltzmann distribution at ``temperature`` and a random phase; the reaction-coordinate mode
    (the imaginary one) starts at the saddle with kinetic energy ``-kT ln U`` (the Boltzmann
    distribution of a 1-D flux) in a random direction.  Net translation and rotation are removed.
    """
    if modes.n_imaginary != 1:
        raise ValueError(f"expected one imaginary mode at the saddle, found {modes.n_imaginary}")
    masses = modes.masses
    omega = modes.angular()  # rad/fs
    hnu = H_EV_FS * omega / (2 * np.pi)  # eV
    m = len(omega)
    kt = KB_EV * temperature
    quanta = np.zeros((runs, m), dtype=int)
    energy = np.zeros((runs, m))
    real = np.arange(1, m)
    if temperature > 0:
        q = np.exp(-hnu[real] / kt)
        quanta[:, real] = rng.geometric(1.0 - q, size=(runs, m - 1)) - 1
    energy[:, real] = (quanta[:, real] + 0.5) * hnu[real]
    phase = rng.uniform(0, 2 * np.pi, size=(runs, m))
    e_units = energy / AMU_A2_FS2  # amu Å^2 / fs^2
    amp = np.sqrt(2 * e_units)
    coord = np.zeros((runs, m))
    mom = np.zeros((runs, m))
    coord[:, real] = amp[:, real] / omega[real] * np.cos(phase[:, real])
    mom[:, real] = -amp[:, real] * np.sin(phase[:, real])
    # reaction coordinate: 1-D flux distribution, random sign
    e_rc = -kt * np.log(rng.uniform(np.finfo(float).tiny, 1.0, size=runs)) if temperature > 0 else np.zeros(runs)
    energy[:, 0] = e_rc
    quanta[:, 0] = -1
    mom[:, 0] = np.sqrt(2 * e_rc / AMU_A2_FS2) * rng.choice([-1.0, 1.0], size=runs)
    inv_sqrt_m = 1 / np.sqrt(masses)[None, :, None]
    x = saddle[None] + np.einsum("rm,mni->rni", coord, modes.vectors) * inv_sqrt_m
    v = np.einsum("rm,mni->rni", mom, modes.vectors) * inv_sqrt_m
    v = remove_rigid_motion(x, v, masses)
    return InitialConditions(positions=x, velocities=v, mode_energies=energy, quanta=quanta)


def maxwell_boltzmann(masses: np.ndarray, temperature: float, rng: np.random.Generator,
                      size: int = 1) -> np.ndarray:
    """Classical Maxwell-Boltzmann velocities (Å/fs), shape (size, N, 3)."""
    sigma = np.sqrt(KB_EV * temperature / (masses * AMU_A2_FS2))
    return rng.normal(size=(size, len(masses), 3)) * sigma[None, :, None]


def relax(surface: Surface, x0: np.ndarray, fmax: float = 1e-3, steps: int = 5000) -> np.ndarray:
    """Nearest local minimum below ``x0`` (ase's BFGS on the analytic forces)."""
    from ase.optimize import BFGS

    atoms = surface.atoms(np.array(x0, float))
    BFGS(atoms, logfile=None).run(fmax=fmax, steps=steps)
    return atoms.positions.copy()


def landmarks(surface: Surface, saddle: np.ndarray, modes: Modes) -> dict[str, np.ndarray]:
    """Geometries of the saddle, the reactant and the two product minima.

    The reactant and the product the steepest-descent path falls into come from relaxing the
    saddle pushed both ways along its imaginary mode; the other product from a start with atom 9
    pushed toward the other partner.
    """
    from basinmark.demo.surface import PAIR_A, PAIR_B, PAIR_C

    def dist(x, p):
        return float(np.linalg.norm(x[p[0]] - x[p[1]]))

    shift = modes.vectors[0] / np.sqrt(modes.masses)[:, None]
    shift = 0.1 * shift / np.abs(shift).max()
    ends = [relax(surface, saddle + sign * shift) for sign in (1.0, -1.0)]
    ends.sort(key=lambda x: -dist(x, PAIR_A))
    out = {"transition_state": saddle, "reactant": ends[0]}
    downhill = "alpha" if dist(ends[1], PAIR_B) < dist(ends[1], PAIR_C) else "beta"
    out[downhill] = ends[1]
    other = "beta" if downhill == "alpha" else "alpha"
    partner = PAIR_C[0] if other == "beta" else PAIR_B[0]
    pair = PAIR_C if other == "beta" else PAIR_B
    spectator = PAIR_B if other == "beta" else PAIR_C
    for frac in (0.5, 0.7, 0.9):
        x = ends[1].copy()
        x[8:12] += frac * (x[partner] - x[8])  # move the whole group on C3 toward the other partner
        x = relax(surface, x)
        if dist(x, pair) < dist(x, spectator):
            out[other] = x
            return out
    raise RuntimeError(f"could not find the {other} minimum of the demo surface")
