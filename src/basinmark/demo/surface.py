"""The model surface of the demo: an invented pseudo-molecule with one ambimodal transition state.

The pseudo-molecule ("ringfork", 12 atoms, C8 O H3-like but not a real compound) is an open
five-carbon chain 1-2-3-4-6 carrying a methyl-like group 9(10,11,12) on atom 3, an oxygen 5 on
atom 4 and hydrogens 7 and 8 on the chain ends.  The reaction closes the ring by forming the bond
1-6 (monitor ``r_a``); once the ring closes, the group on atom 3 leans over and bonds either to
atom 2 (``r_b``, product *alpha*) or to atom 4 (``r_c``, product *beta*).  Both products are
reached from the one transition state: the valley leaving it runs onto a ridge (a valley-ridge
inflection) and splits.

Every term is a function of interatomic distances only, so energy and forces are exact and cheap
and vectorise over many geometries at once (:func:`energy_forces`):

* framework: Morse bonds (depths of typical bond energies), harmonic 1-3 "angle" springs, soft 1-4
  springs and angle-weighted dihedral terms for the torsions (the chain-end hydrogens and the
  oxygen), all with rest values taken from a reference geometry built here, and a weak
  exponential repulsion between all other pairs;
* reactive part ``V(r_a, r_b, r_c)``: a ring-closure profile in ``r_a`` and a three-centre term in
  ``r_b, r_c`` (bond orders ``n = exp(-(r - r0)/w)``) that a switch ``s(r_a)`` turns on as the ring
  closes; its localisation penalty ``gamma * n_b * n_c`` makes the symmetric (bridged) line a ridge.

Units: Å, eV, amu (ASE's).  All numbers are our own invention, tuned for the demo.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from ase import Atoms
from ase.calculators.calculator import Calculator, all_changes

SYMBOLS = ["C", "C", "C", "C", "O", "C", "H", "H", "C", "H", "H", "H"]
N_ATOMS = len(SYMBOLS)

#: the three reactive distances, 0-based atom pairs (1-based: 1-6, 2-9, 4-9)
PAIR_A = (0, 5)
PAIR_B = (1, 8)
PAIR_C = (3, 8)

# framework bonds (0-based) and their force constants (eV/Å^2)
_BONDS = [
    ((0, 1), 28.0), ((1, 2), 28.0), ((2, 3), 28.0), ((3, 5), 28.0),  # chain C-C
    ((3, 4), 75.0),  # C=O (about 12 mdyn/Å, a typical carbonyl stretch constant, from memory)
    ((2, 8), 26.0),  # C3-C9
    ((0, 6), 30.0), ((5, 7), 30.0),  # chain-end C-H
    ((8, 9), 30.0), ((8, 10), 30.0), ((8, 11), 30.0),  # C9-H
]
#: Morse well depth (eV) of each framework bond by element pair: typical bond dissociation energies
#: (C-C about 83, C=O about 178, C-H about 110 kcal/mol; from memory).  With k fixed, the range
#: parameter follows as a = sqrt(k / 2D): stiffer than harmonic when compressed, softer when stretched.
_BOND_DEPTH = {frozenset("C"): 3.6, frozenset("CO"): 7.7, frozenset("CH"): 4.8}
# 1-3 pairs ("angles"), eV/Å^2; the pairs 2-9 and 4-9 are reactive and handled elsewhere
_ANGLES = [
    ((0, 2), 5.0), ((1, 3), 5.0), ((2, 5), 5.0),  # chain
    ((2, 4), 6.0), ((4, 5), 6.0),  # around C4 (O)
    ((1, 6), 14.0), ((3, 7), 14.0),  # chain-end H: a stiff H-C-C bend (a weak one let the H swing through its carbon)
    ((2, 9), 3.5), ((2, 10), 3.5), ((2, 11), 3.5),  # H on C9 to C3
    ((9, 10), 2.5), ((9, 11), 2.5), ((10, 11), 2.5),  # H-H on C9
]
# soft 1-4 pairs holding torsions; eV/Å^2
_TORSIONS = [
    ((0, 3), 4.0), ((1, 5), 4.0), ((1, 4), 4.0),  # chain torsions (two become 1-3 pairs of the ring)
    ((8, 0), 0.5), ((8, 5), 0.5),  # group on C3 against the chain
    ((6, 2), 2.5), ((7, 2), 2.0), ((7, 4), 1.5),  # chain-end H
]
#: torsion of the group on C3, held by springs on *differences* of its hydrogens' distances to C2 and
#: C4: 0.5 k ((r1 - r2) - rest)^2.  A lean of the whole group shifts those distances alike and is
#: hardly resisted; a twist changes them unequally.  (A dihedral term would be singular when a C-H
#: lines up with the C3-C9 axis, which hot runs reach.)  eV/Å^2
_DIFFERENCES = [
    (((9, x), (10, x)), 1.2) for x in (1, 3)] + [(((10, x), (11, x)), 1.2) for x in (1, 3)] + [
    (((11, x), (9, x)), 1.2) for x in (1, 3)]
#: torsions of the chain-end hydrogens and the oxygen, k (1 - cos(phi - phi_ref)) in eV: without them
#: those atoms could swing about their C-C axis held only by 1-4 distance springs, which give no
#: first-order restoring force near a trans or cis arrangement.  Such floppy modes came out at
#: 80-160 cm^-1, and a quasiclassical start (displacing atoms along straight normal-mode vectors)
#: then stretched C-H bonds to 1.5-1.9 A at t = 0 and fed several eV into the run.
#: Quadruples i-j-k-l (0-based), torsion about the j-k bond.
_DIHEDRALS = [
    ((6, 0, 1, 2), 2.0),  # H7-C1-C2-C3
    ((7, 5, 3, 2), 2.0),  # H8-C6-C4-C3
    ((4, 3, 2, 1), 3.0),  # O5-C4-C3-C2 (keeps the oxygen's wag stiff)
]


def reference_geometry() -> np.ndarray:
    """A hand-built geometry near the transition state (Å); framework rest lengths come from it."""
    side = 1.52
    radius = side / (2 * np.sin(np.pi / 5))
    ang = {i: np.deg2rad(d) for i, d in {2: 90.0, 1: 162.0, 0: 234.0, 5: 306.0, 3: 18.0}.items()}
    pos = np.zeros((N_ATOMS, 3))
    for i, phi in ang.items():
        pos[i] = radius * np.array([np.cos(phi), np.sin(phi), 0.0])
    # open the ring: move atoms 1 and 6 apart and pucker them out of plane
    pos[0] += [-0.30, -0.10, 0.25]
    pos[5] += [0.30, -0.10, -0.25]

    def attach(center: int, direction, length: float) -> np.ndarray:
        d = np.asarray(direction, float)
        return pos[center] + length * d / np.linalg.norm(d)

    def radial(i: int) -> np.ndarray:
        v = pos[i].copy()
        v[2] = 0.0
        return v / np.linalg.norm(v)

    pos[8] = attach(2, [0.0, 0.55, 1.0], 1.53)  # C9 above C3
    pos[4] = attach(3, radial(3) + [0.0, 0.0, -0.9], 1.26)  # O5 on C4, out of plane
    pos[6] = attach(0, radial(0) + [0.0, 0.0, 0.7], 1.09)  # H7 on C1
    pos[7] = attach(5, radial(5) + [0.0, 0.0, 0.7], 1.09)  # H8 on C6
    up = pos[8] - pos[2]
    up /= np.linalg.norm(up)
    e1 = np.cross(up, [1.0, 0.0, 0.0])
    e1 /= np.linalg.norm(e1)
    e2 = np.cross(up, e1)
    for k, i in enumerate((9, 10, 11)):
        phi = 2 * np.pi * k / 3 + np.pi / 2
        d = np.cos(np.deg2rad(70.5)) * up + np.sin(np.deg2rad(70.5)) * (np.cos(phi) * e1 + np.sin(phi) * e2)
        pos[i] = pos[8] + 1.09 * d
    return pos


@dataclass(frozen=True)
class ReactiveParams:
    """Parameters of the reactive part (Å, eV)."""

    # ring closure along r_a: Morse well of the new bond, a barrier bump, a soft spring holding the open chain
    d_a: float = 0.8
    alpha_a: float = 1.9
    r0_a: float = 1.54
    bump: float = 0.8
    bump_at: float = 2.65
    bump_width: float = 1.1
    k_open: float = 1.8
    open_at: float = 3.2
    # switch s(r_a) turning the three-centre term on as the ring closes
    switch_at: float = 2.05
    switch_width: float = 0.13
    # three-centre term over r_b (to atom 2, alpha) and r_c (to atom 4, beta)
    r0_bc: float = 1.46
    w_bc: float = 0.38
    d_b: float = 1.5  # depth of the alpha bond
    d_c: float = 1.35  # depth of the beta bond
    gamma: float = 4.0  # localisation penalty: makes the bridged line a ridge
    k_bc: float = 2.0  # spring holding r_b, r_c at rest while the ring is open
    rest_bc: float = 2.46
    k_bc_weak: float = 0.1  # always-on weak spring on r_b, r_c (keeps the spectator distance sane)
    # weak repulsion of all non-framework pairs: a * exp(-r / rho)
    rep_a: float = 40.0
    rep_rho: float = 0.30


def _pair_arrays(pairs):
    idx = np.array([p for p, _ in pairs], dtype=np.intp)
    k = np.array([k for _, k in pairs], dtype=float)
    return idx, k


def dihedral_angles(x: np.ndarray, quads: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Dihedral angles (rad) of atom quadruples and their gradients.

    ``x`` is ``(..., N, 3)``, ``quads`` ``(Q, 4)``; returns ``phi (..., Q)`` in (-pi, pi] and
    ``dphi/dx (..., Q, 4, 3)`` for the four atoms of each quadruple (the usual analytic formula:
    Blondel and Karplus, J. Comput. Chem. 17 (1996) 1132, from memory; checked in the tests
    against central differences and against ``ase.Atoms.get_dihedral``).
    """
    b1 = x[..., quads[:, 1], :] - x[..., quads[:, 0], :]
    b2 = x[..., quads[:, 2], :] - x[..., quads[:, 1], :]
    b3 = x[..., quads[:, 3], :] - x[..., quads[:, 2], :]
    n1 = np.cross(b1, b2)
    n2 = np.cross(b2, b3)
    nb2 = np.sqrt(np.einsum("...i,...i->...", b2, b2))
    phi = np.arctan2(nb2 * np.einsum("...i,...i->...", b1, n2), np.einsum("...i,...i->...", n1, n2))
    n1sq = np.einsum("...i,...i->...", n1, n1)
    n2sq = np.einsum("...i,...i->...", n2, n2)
    gi = (-nb2 / n1sq)[..., None] * n1
    gl = (nb2 / n2sq)[..., None] * n2
    f1 = (np.einsum("...i,...i->...", b1, b2) / nb2**2)[..., None]
    f3 = (np.einsum("...i,...i->...", b3, b2) / nb2**2)[..., None]
    gj = f3 * gl - (1 + f1) * gi
    gk = f1 * gi - (1 + f3) * gl
    return phi, np.stack([gi, gj, gk, gl], axis=-2)


def _sin2_angle(x: np.ndarray, i: np.ndarray, j: np.ndarray, k: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """sin^2 of the angle i-j-k (..., Q) and its gradient (..., Q, 3, 3) for atoms i, j, k."""
    u = x[..., i, :] - x[..., j, :]
    v = x[..., k, :] - x[..., j, :]
    nu = np.sqrt(np.einsum("...i,...i->...", u, u))[..., None]
    nv = np.sqrt(np.einsum("...i,...i->...", v, v))[..., None]
    c = np.einsum("...i,...i->...", u, v)[..., None] / (nu * nv)
    dcdu = (v / nv - c * u / nu) / nu
    dcdv = (u / nu - c * v / nv) / nv
    g = -2 * c
    gi, gk = g * dcdu, g * dcdv
    return (1 - c**2)[..., 0], np.stack([gi, -(gi + gk), gk], axis=-2)


@dataclass
class Surface:
    """The model surface: evaluate energy and forces for one or many geometries."""

    params: ReactiveParams = field(default_factory=ReactiveParams)

    def __post_init__(self) -> None:
        ref = reference_geometry()
        self.reference = ref
        springs = _ANGLES + _TORSIONS
        self._spr_idx, self._spr_k = _pair_arrays(springs)
        d = ref[self._spr_idx[:, 0]] - ref[self._spr_idx[:, 1]]
        self._spr_r0 = np.linalg.norm(d, axis=1)
        self._bond_idx, bond_k = _pair_arrays(_BONDS)
        self._bond_r0 = np.linalg.norm(ref[self._bond_idx[:, 0]] - ref[self._bond_idx[:, 1]], axis=1)
        self._bond_d = np.array([_BOND_DEPTH[frozenset((SYMBOLS[i], SYMBOLS[j]))] for i, j in self._bond_idx])
        self._bond_a = np.sqrt(bond_k / (2 * self._bond_d))
        springs = _BONDS + springs
        taken = {tuple(sorted(p)) for p, _ in springs}
        taken |= {tuple(sorted(p)) for p in (PAIR_A, PAIR_B, PAIR_C)}
        rep = [(i, j) for i in range(N_ATOMS) for j in range(i + 1, N_ATOMS) if (i, j) not in taken]
        self._rep_idx = np.array(rep, dtype=np.intp)
        self.masses = Atoms(SYMBOLS).get_masses()
        self._dif_p = np.array([p for (p, _q), _ in _DIFFERENCES], dtype=np.intp)
        self._dif_q = np.array([q for (_p, q), _ in _DIFFERENCES], dtype=np.intp)
        self._dif_k = np.array([k for _, k in _DIFFERENCES])
        dist = lambda idx: np.linalg.norm(ref[idx[:, 0]] - ref[idx[:, 1]], axis=1)  # noqa: E731
        self._dif_rest = dist(self._dif_p) - dist(self._dif_q)
        self._dih_idx = np.array([q for q, _ in _DIHEDRALS], dtype=np.intp)
        self._dih_k = np.array([k for _, k in _DIHEDRALS])
        self._dih_ref = dihedral_angles(ref, self._dih_idx)[0]

    # --- reactive part as a function of (a, b, c) ------------------------------------------
    def reactive(self, a, b, c):
        """Energy of the reactive part and its derivatives (dV/da, dV/db, dV/dc), arrays broadcast."""
        p = self.params
        ea = np.exp(-p.alpha_a * (a - p.r0_a))
        v = p.d_a * ((1 - ea) ** 2 - 1)
        dva = p.d_a * 2 * (1 - ea) * p.alpha_a * ea
        g = np.exp(-(((a - p.bump_at) / p.bump_width) ** 2))
        v = v + p.bump * g
        dva = dva + p.bump * g * (-2 * (a - p.bump_at) / p.bump_width**2)
        x = (a - p.switch_at) / p.switch_width
        s = 0.5 * (1 - np.tanh(x))
        ds = -0.5 / np.cosh(x) ** 2 / p.switch_width
        # the open chain's spring fades out as the ring closes (so it does not stretch the new bond)
        spring = 0.5 * p.k_open * (a - p.open_at) ** 2
        v = v + (1 - s) * spring
        dva = dva + (1 - s) * p.k_open * (a - p.open_at) - ds * spring

        nb = np.exp(-(b - p.r0_bc) / p.w_bc)
        nc = np.exp(-(c - p.r0_bc) / p.w_bc)
        dnb = -nb / p.w_bc
        dnc = -nc / p.w_bc
        ntot = nb + nc
        w = -2 * p.d_b * nb - 2 * p.d_c * nc + 0.5 * (p.d_b + p.d_c) * ntot**2 + p.gamma * nb * nc
        dwb = (-2 * p.d_b + (p.d_b + p.d_c) * ntot + p.gamma * nc) * dnb
        dwc = (-2 * p.d_c + (p.d_b + p.d_c) * ntot + p.gamma * nb) * dnc
        sp = 0.5 * p.k_bc * ((b - p.rest_bc) ** 2 + (c - p.rest_bc) ** 2)
        dspb = p.k_bc * (b - p.rest_bc)
        dspc = p.k_bc * (c - p.rest_bc)
        weak = 0.5 * p.k_bc_weak * ((b - p.rest_bc) ** 2 + (c - p.rest_bc) ** 2)

        v = v + s * w + (1 - s) * sp + weak
        dva = dva + ds * (w - sp)
        dvb = s * dwb + (1 - s) * dspb + p.k_bc_weak * (b - p.rest_bc)
        dvc = s * dwc + (1 - s) * dspc + p.k_bc_weak * (c - p.rest_bc)
        return v, dva, dvb, dvc

    # --- full surface ---------------------------------------------------------------------
    def energy_forces(self, positions: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Energy (eV) and forces (eV/Å) for positions ``(..., N, 3)``; energy has shape ``(...)``."""
        x = np.asarray(positions, dtype=float)
        forces = np.zeros_like(x)
        energy = np.zeros(x.shape[:-2])

        def add_pairs(idx, dedr_fn):
            d = x[..., idx[:, 0], :] - x[..., idx[:, 1], :]
            r = np.sqrt(np.einsum("...i,...i->...", d, d))
            e, dedr = dedr_fn(r)
            f = (-dedr / r)[..., None] * d
            # scatter-add over pairs by a loop over the 12 atoms: measured 0.6 ms against 1.0 ms for
            # np.add.at and 1.2 ms for an incidence-matrix einsum (200 geometries, 50 pairs)
            for atom in range(N_ATOMS):
                plus = idx[:, 0] == atom
                minus = idx[:, 1] == atom
                if plus.any():
                    forces[..., atom, :] += f[..., plus, :].sum(axis=-2)
                if minus.any():
                    forces[..., atom, :] -= f[..., minus, :].sum(axis=-2)
            return e.sum(axis=-1)

        dm, am, rm = self._bond_d, self._bond_a, self._bond_r0

        def morse(r):
            e = np.exp(-am * (r - rm))
            return dm * (1 - e) ** 2, 2 * dm * am * e * (1 - e)

        energy += add_pairs(self._bond_idx, morse)
        k, r0 = self._spr_k, self._spr_r0
        energy += add_pairs(self._spr_idx, lambda r: (0.5 * k * (r - r0) ** 2, k * (r - r0)))
        pa, rho = self.params.rep_a, self.params.rep_rho
        energy += add_pairs(self._rep_idx, lambda r: (pa * np.exp(-r / rho), -pa / rho * np.exp(-r / rho)))

        def vec(idx):
            d = x[..., idx[:, 0], :] - x[..., idx[:, 1], :]
            return d, np.sqrt(np.einsum("...i,...i->...", d, d))

        dp, rp = vec(self._dif_p)
        dq, rq = vec(self._dif_q)
        dev = rp - rq - self._dif_rest
        energy += (0.5 * self._dif_k * dev**2).sum(axis=-1)
        g = self._dif_k * dev
        for idx, d, r, sign in ((self._dif_p, dp, rp, 1.0), (self._dif_q, dq, rq, -1.0)):
            f = (-sign * g / r)[..., None] * d
            for n, (i, j) in enumerate(idx):
                forces[..., i, :] += f[..., n, :]
                forces[..., j, :] -= f[..., n, :]

        energy += self._torsions(x, forces)

        idx = np.array([PAIR_A, PAIR_B, PAIR_C], dtype=np.intp)
        d = x[..., idx[:, 0], :] - x[..., idx[:, 1], :]
        r = np.sqrt(np.einsum("...i,...i->...", d, d))
        v, dva, dvb, dvc = self.reactive(r[..., 0], r[..., 1], r[..., 2])
        energy += v
        for n, dv in enumerate((dva, dvb, dvc)):
            f = (-dv / r[..., n])[..., None] * d[..., n, :]
            forces[..., idx[n, 0], :] += f
            forces[..., idx[n, 1], :] -= f
        return energy, forces

    def _torsions(self, x: np.ndarray, forces: np.ndarray) -> np.ndarray:
        """k (1 - cos(phi - phi_ref)) sin^2(theta1) sin^2(theta2) for each dihedral; adds its forces.

        The sin^2 weights of the two bond angles make the term vanish smoothly where a dihedral is
        undefined (three atoms in a line), so a hot run passing near such a geometry meets no
        singular force (the plain 1 - cos form has gradients growing as 1 / sin(theta) there).
        """
        q = self._dih_idx
        phi, grads = dihedral_angles(x, q)
        dphi = phi - self._dih_ref
        k = self._dih_k
        base = k * (1 - np.cos(dphi))
        w1, g1 = _sin2_angle(x, q[:, 0], q[:, 1], q[:, 2])
        w2, g2 = _sin2_angle(x, q[:, 1], q[:, 2], q[:, 3])
        dedphi = (k * np.sin(dphi) * w1 * w2)[..., None]
        a1 = (base * w2)[..., None]
        a2 = (base * w1)[..., None]
        for n, quad in enumerate(q):  # a loop: an atom may sit in several quadruples
            for m in range(4):
                forces[..., quad[m], :] -= dedphi[..., n, :] * grads[..., n, m, :]
            for m in range(3):
                forces[..., quad[m], :] -= a1[..., n, :] * g1[..., n, m, :]
                forces[..., quad[m + 1], :] -= a2[..., n, :] * g2[..., n, m, :]
        return (base * w1 * w2).sum(axis=-1)

    def energy(self, positions: np.ndarray) -> np.ndarray:
        return self.energy_forces(positions)[0]

    def atoms(self, positions: np.ndarray | None = None) -> Atoms:
        """An ``ase.Atoms`` of the pseudo-molecule with this surface as its calculator."""
        a = Atoms(SYMBOLS, positions=self.reference if positions is None else positions)
        a.calc = RingforkCalculator(surface=self)
        return a


class RingforkCalculator(Calculator):
    """ASE calculator for the demo surface (analytic energy and forces)."""

    implemented_properties = ["energy", "forces"]

    def __init__(self, surface: Surface | None = None, **kwargs):
        super().__init__(**kwargs)
        self.surface = surface or Surface()

    def calculate(self, atoms=None, properties=("energy",), system_changes=all_changes):
        super().calculate(atoms, properties, system_changes)
        if len(self.atoms) != N_ATOMS:
            raise ValueError(f"the demo surface is for {N_ATOMS} atoms, got {len(self.atoms)}")
        e, f = self.surface.energy_forces(self.atoms.positions)
        self.results["energy"] = float(e)
        self.results["free_energy"] = float(e)
        self.results["forces"] = f
