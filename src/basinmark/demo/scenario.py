"""The invented scenario of the bundled set: the rules file and the README text."""

from __future__ import annotations

import math
from typing import Mapping

from ase import units

from basinmark.core.units import energy_factor


def basins_toml(reactant_above: float, product_a_below: float, bond_below: float,
                spectator_above: float) -> str:
    """The rules file of the demo set (our fixed TOML schema), thresholds tuned to the model surface."""
    return f"""# Rules for the ringfork demo set (model surface of basinmark's own; thresholds in Å).
name = "ringfork"
reactant = "reactant"
dwell_fs = 20.0

[monitors]
r_a = [1, 6]   # ring closure
r_b = [2, 9]   # group on C3 bonds to C2: alpha
r_c = [4, 9]   # group on C3 bonds to C4: beta

[basins.reactant]
r_a = {{ above = {reactant_above} }}

[basins.alpha]
r_a = {{ below = {product_a_below} }}
r_b = {{ below = {bond_below} }}
r_c = {{ above = {spectator_above} }}

[basins.beta]
r_a = {{ below = {product_a_below} }}
r_c = {{ below = {bond_below} }}
r_b = {{ above = {spectator_above} }}

[flags]
late_commit_fs = 250.0
max_energy_drift = 1.0
energy_unit = "kcal/mol"
min_length_fs = 100.0

[time_gap]
bonds = ["r_a", "r_b"]
form_below = {product_a_below}
concerted_fs = 60.0   # common practice, no source
"""


#: invented activation free-energy difference (kcal/mol) of a hypothetical pair of separate
#: transition states, for the TST comparison in the README
INVENTED_DDG_KCAL = 0.3


def readme_text(energies_ev: Mapping[str, float], imaginary_cm: float, runs: int, seed: int,
                temperature: float, summary_lines: list[str]) -> str:
    """README of a generated set; energies relative to the transition state, in eV."""
    kcal = energy_factor("kcal/mol")
    e = {k: v / kcal for k, v in energies_ev.items()}
    lines = "\n".join(f"    {s}" for s in summary_lines)
    rt = units.kB * 298.15 / kcal  # kcal/mol
    ratio = math.exp(INVENTED_DDG_KCAL / rt)
    share = ratio / (1 + ratio)
    return f"""# ringfork — a demo set made by basinmark

Everything here is invented: the pseudo-molecule, its energy surface, the numbers and the story.
It is not a real compound, and no real laboratory or study is described.

## The story

*Ringforkane* is a made-up 12-atom pseudo-molecule (carbons 1, 2, 3, 4, 6 and 9, oxygen 5,
hydrogens 7, 8, 10, 11, 12).  It starts as an open chain 1-2-3-4-6 with a CH3-like group (9) on
atom 3.  In its one reaction the chain closes into a five-membered ring (bond 1-6, monitor
`r_a`), and the group on atom 3 then bonds to one neighbour of atom 3, forming a three-membered ring:

* to atom 2 (`r_b`) — product **alpha**, the deeper one;
* to atom 4 (`r_c`) — product **beta**.

Both products come from the **same** transition state: after it the valley runs onto a ridge
(a valley-ridge inflection) and forks, so which product forms is decided by the dynamics, not
by a second barrier.

## Numbers of the model surface (relative to the transition state)

| point | energy (kcal/mol) |
| --- | --- |
| reactant | {e["reactant"]:.1f} |
| transition state | 0.0 (one imaginary frequency, {imaginary_cm:.0f}i cm⁻¹) |
| alpha | {e["alpha"]:.1f} |
| beta | {e["beta"]:.1f} |

## What a simple theory would say

Transition state theory with this one transition state cannot tell alpha from beta at all.
Suppose instead someone had computed two separate transition states, one per product, with an
(invented) difference of activation free energies ΔΔG‡ = {INVENTED_DDG_KCAL} kcal/mol in favour of
alpha.  At 298.15 K that predicts a ratio exp(ΔΔG‡/RT) ≈ {ratio:.2f}, about
{100 * share:.0f}:{100 * (1 - share):.0f}.  The runs here give a far more lopsided split — the point of
the exercise is to count them honestly and say how sure the count is.

## How the set was made

{runs} runs, seed {seed}, {temperature:g} K, by `basinmark make-demo` (quasiclassical initial
conditions at the transition state: zero-point plus thermal energy in every real normal mode,
a Boltzmann flux along the reaction coordinate; velocity Verlet; each run as a backward half
`runs/<run>.bwd.xyz.gz`, at negative times, and a forward half `runs/<run>.fwd.xyz.gz`).
Comment keys: `time` (fs), `epot` and `ekin` (eV; potential zero at the transition state).

The generator's own rough end-point check (it stops a half once it has stayed in one region,
and it is **not** a classification; classify with `basins.toml`):

{lines}

Expect, by design: most reactive runs give alpha, some give beta; a few runs in a hundred recross
(both ends in the reactant); some commit late, some visit both products, now and then one joins the
two products (backward to one, forward to the other), a few do not finish within the time limit of a
half, and one or two fail the energy check (total-energy drift above 1 kcal/mol) — the classifier's
flags should point at all of these.
"""


def manifest_text(name: str, temperature: float) -> str:
    """``basinmark-set.toml`` of a generated set: the default file layout, plus the scenario's invented TST
    estimate so that summaries show the comparison without being told."""
    return (f'# Set manifest written by basinmark make-demo; docs/set-manifest.md describes every key.\n'
            f'name = "{name}"\n\n'
            f'[tst]\n'
            f'major = "alpha"\n'
            f'minor = "beta"\n'
            f'ddg = {INVENTED_DDG_KCAL}            # G‡(minor) - G‡(major) of two hypothetical separate transition states\n'
            f'unit = "kcal/mol"\n'
            f'temperature = {temperature:g}\n'
            f'source = "invented for the demo scenario; see README.md"\n')
