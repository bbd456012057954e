"""Starting rules proposed from the runs themselves: which distances tell the ends apart, and where.

For every atom pair that is a bond at some run end, the distance is measured at both ends of every run (the
mean over the last few frames of each half, to soften vibration).  Those end values are split into two
groups by Otsu's method (N. Otsu, IEEE Trans. Syst. Man Cybern. 9, 62, 1979: the split that maximises the
between-group variance; in one dimension the same split as two-cluster k-means).  A pair whose end values
fall into two well separated groups (a bond made in some ends and broken in others) is a candidate
monitor; the candidates are ranked by the share of the variance the split explains, and a candidate that
puts the ends into the same groups as one already chosen is left out as saying the same thing.

Thresholds come from the two groups: ``below`` a quarter of the way from the split down to the low group's
median, ``above`` a quarter of the way up to the high group's median (so that a run must be clearly inside a
group to count, and vibration near the split does not flicker it in and out).  Basins are the combinations
of low/high that the ends actually show: the one most backward ends share is the reactant, the others (each
held by at least :data:`MIN_BASIN_SHARE` of the ends) are products.  A basin's conditions are the monitors
on which it differs from the reactant (bonds made or broken), plus, for every other basin, one monitor on
which the two differ (the one whose split explains most), so that no two basins can hold at once.  Every number carries a
sentence saying how it was chosen; nothing here is a chemist's judgement, and the rules file says so.
"""

from __future__ import annotations

from collections import Counter
from dataclasses import dataclass, field

import numpy as np

from basinmark.core.geometry import bond_cutoffs

#: frames averaged at each end of a half (vibration is softened, the end state kept)
END_FRAMES = 5
#: a split group must hold at least this share of the ends (fewer is noise, not a basin)
MIN_GROUP_SHARE = 0.03
#: a basin must hold at least this share of all ends to be proposed
MIN_BASIN_SHARE = 0.02
#: the split must explain at least this share of the end values' variance (common practice, no source)
MIN_EXPLAINED = 0.6
#: two monitors whose end groups agree on this share of ends say the same thing
REDUNDANT_AGREEMENT = 0.97
MAX_MONITORS = 6
#: the groups' means must differ by at least this much (Å) to be a bond made or broken
MIN_SEPARATION = 0.3
#: thresholds lie this share of the way from the split towards each group's median (common practice, no source)
MARGIN = 0.25
#: time a run must stay in a basin to count as committed: common practice, no source
DWELL_FS = 20.0


@dataclass
class Split:
    """Otsu's two-group split of one set of values."""

    threshold: float  # between the groups: values below are the low group
    explained: float  # between-group variance / total variance, 0..1
    low: np.ndarray
    high: np.ndarray


def otsu_split(values: np.ndarray) -> Split | None:
    """The two-group split maximising the between-group variance (Otsu 1979), or None for < 2 distinct values."""
    v = np.sort(np.asarray(values, dtype=np.float64))
    v = v[np.isfinite(v)]
    n = v.size
    if n < 2 or v[0] == v[-1]:
        return None
    csum = np.cumsum(v)
    k = np.arange(1, n)  # low group = v[:k]
    w0, w1 = k / n, (n - k) / n
    m0 = csum[:-1] / k
    m1 = (csum[-1] - csum[:-1]) / (n - k)
    between = w0 * w1 * (m0 - m1) ** 2
    between[v[1:] == v[:-1]] = -1.0  # never split between equal values
    best = int(np.argmax(between))
    total = float(np.var(v))
    return Split(threshold=float(0.5 * (v[best] + v[best + 1])), explained=float(between[best] / total),
                 low=v[: best + 1], high=v[best + 1:])


@dataclass
class ProposedMonitor:
    name: str
    atoms: tuple[int, int]  # 1-based
    split: Split
    below: float
    above: float
    member: np.ndarray  # True where an end is in the low group
    how: str  # one sentence: how the monitor and its thresholds were chosen


@dataclass
class ProposedBasin:
    name: str
    pattern: tuple[bool, ...]  # per monitor: True = below (low group)
    n_ends: int
    n_backward: int
    n_forward: int
    how: str
    used: set = field(default_factory=set)  # indices of the monitors this basin's conditions name


@dataclass
class Proposal:
    monitors: list[ProposedMonitor] = field(default_factory=list)
    basins: list[ProposedBasin] = field(default_factory=list)
    reactant: str = "reactant"
    dwell_fs: float = DWELL_FS
    n_runs: int = 0
    notes: list[str] = field(default_factory=list)  # what could not be proposed, and why


def end_values(runs, pairs: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Distances of ``pairs`` (0-based, (P, 2)) at the backward and forward end of every run: two (R, P) arrays."""
    back, fwd = [], []
    for t in runs:
        ts = t.ts_index
        k_b = max(1, min(END_FRAMES, ts))
        k_f = max(1, min(END_FRAMES, t.n_frames - 1 - ts))
        for frames, out in ((t.positions[:k_b], back), (t.positions[t.n_frames - k_f:], fwd)):
            p = np.asarray(frames, dtype=np.float64)
            d = np.linalg.norm(p[:, pairs[:, 0]] - p[:, pairs[:, 1]], axis=-1)
            out.append(d.mean(axis=0))
    return np.array(back), np.array(fwd)


def _candidate_pairs(numbers: np.ndarray, back: np.ndarray, fwd: np.ndarray, pairs: np.ndarray) -> np.ndarray:
    """Pairs that are bonds (covalent radii, tolerance 1.2) in at least some ends."""
    cut = bond_cutoffs(numbers)
    i, j = np.triu_indices(numbers.size, 1)
    lookup = {(a, b): c for a, b, c in zip(i, j, cut)}
    cutoffs = np.array([lookup[(a, b)] for a, b in pairs])
    ends = np.vstack([back, fwd])
    bonded_share = (ends < cutoffs).mean(axis=0)
    return np.flatnonzero(bonded_share >= MIN_GROUP_SHARE)


def propose(runs, numbers: np.ndarray) -> Proposal:
    """Monitors, thresholds and basins from the ends of ``runs`` (Trajectory objects sharing ``numbers``)."""
    runs = [t for t in runs if t.n_frames >= 2]
    out = Proposal(n_runs=len(runs))
    if len(runs) < 5:
        out.notes.append(f"only {len(runs)} usable runs: too few to tell basins from their ends; write the "
                         "rules by hand (docs/rules-file.md)")
        return out
    n = numbers.size
    pairs = np.stack(np.triu_indices(n, 1), axis=1)
    back, fwd = end_values(runs, pairs)
    ends = np.vstack([back, fwd])  # rows: backward ends of all runs, then forward ends
    n_ends = ends.shape[0]
    scored = []
    for c in _candidate_pairs(numbers, back, fwd, pairs):
        split = otsu_split(ends[:, c])
        if split is None:
            continue
        small = min(split.low.size, split.high.size) / n_ends
        if small < MIN_GROUP_SHARE or split.explained < MIN_EXPLAINED:
            continue
        if split.high.mean() - split.low.mean() < MIN_SEPARATION:
            continue
        scored.append((split.explained, int(c), split))
    scored.sort(key=lambda s: (-s[0], s[1]))
    for explained, c, split in scored:
        member = ends[:, c] < split.threshold
        same = [m for m in out.monitors if max(np.mean(member == m.member), np.mean(member != m.member))
                >= REDUNDANT_AGREEMENT]
        if same:
            continue
        a, b = int(pairs[c, 0]) + 1, int(pairs[c, 1]) + 1
        lo_mid, hi_mid = float(np.median(split.low)), float(np.median(split.high))
        below = round(split.threshold - MARGIN * (split.threshold - lo_mid), 2)
        above = round(split.threshold + MARGIN * (hi_mid - split.threshold), 2)
        how = (f"distance {a}-{b}: its end values fall into two groups (Otsu split at {split.threshold:.2f} Å "
               f"explains {100 * explained:.0f} % of their variance): {split.low.size} ends around "
               f"{lo_mid:.2f} Å (median), {split.high.size} around {hi_mid:.2f} Å; below = {below:.2f} and "
               f"above = {above:.2f} lie a quarter of the way from the split towards each group's median")
        out.monitors.append(ProposedMonitor(f"d_{a}_{b}", (a, b), split, below, above, member, how))
        if len(out.monitors) == MAX_MONITORS:
            break
    if not out.monitors:
        out.notes.append("no atom pair's end distances fall into two clear groups (a bond made in some ends and "
                         "broken in others); write the monitors by hand (docs/rules-file.md)")
        return out
    _basins(out, ends, len(runs))
    return out


def _basins(out: Proposal, ends: np.ndarray, n_runs: int) -> None:
    mons = out.monitors
    patterns = [tuple(bool(m.member[e]) for m in mons) for e in range(ends.shape[0])]
    back = Counter(patterns[:n_runs])
    both = Counter(patterns)
    reactant_pattern = back.most_common(1)[0][0]
    fwd = Counter(patterns[n_runs:])
    kept = [p for p, c in both.most_common() if c / len(patterns) >= MIN_BASIN_SHARE or p == reactant_pattern]
    out.basins.append(ProposedBasin("reactant", reactant_pattern, both[reactant_pattern], back[reactant_pattern],
                                    fwd[reactant_pattern],
                                    f"the combination most backward ends share ({back[reactant_pattern]} of "
                                    f"{n_runs}); taken as the reactant"))
    k = 0
    for p in kept:
        if p == reactant_pattern:
            continue
        name = f"product_{chr(ord('a') + k)}"
        k += 1
        made = [m.name for m, low, r in zip(mons, p, reactant_pattern) if low and not r]
        broken = [m.name for m, low, r in zip(mons, p, reactant_pattern) if r and not low]
        change = "; ".join(x for x in (f"bonds made: {', '.join(made)}" if made else "",
                                       f"broken: {', '.join(broken)}" if broken else "") if x)
        out.basins.append(ProposedBasin(name, p, both[p], back[p], fwd[p],
                                        f"held by {both[p]} ends ({fwd[p]} forward, {back[p]} backward); "
                                        f"{change or 'same bonds as the reactant'}"))
    if len(out.basins) < 2:
        out.notes.append("every end shows the same bonds: no product basin could be told apart")
        return
    react = out.basins[0]
    for b in out.basins[1:]:
        b.used |= {i for i, (x, r) in enumerate(zip(b.pattern, react.pattern)) if x != r}
    # monitors are ordered by how much of their variance the split explains: the first difference is the best
    for i, b1 in enumerate(out.basins):
        for b2 in out.basins[i + 1:]:
            if any(b1.pattern[k] != b2.pattern[k] for k in b1.used & b2.used):
                continue
            k = next(k for k in range(len(mons)) if b1.pattern[k] != b2.pattern[k])
            b1.used.add(k)
            b2.used.add(k)


def rules_text(p: Proposal, set_name: str) -> str:
    """A commented rules file (TOML) for the proposal; every number says how it was chosen."""
    lines = [
        f"# Rules PROPOSED by `basinmark init` for the set {set_name!r} from the ends of {p.n_runs} runs.",
        "# They are a starting point chosen by numbers, not by a chemist: check every monitor and threshold",
        "# against the molecule (the window's traces help), rename the basins, then accept them with",
        "# `basinmark init FOLDER --accept`, which makes this file the set's basins.toml.",
        "# Reference of every key: docs/rules-file.md.",
        "",
        f'name = "{set_name} (proposed)"',
        f'reactant = "{p.reactant}"',
        f"dwell_fs = {p.dwell_fs:g}   # a run must stay this long in a basin to commit: "
        "common practice, no source (a few bond vibrations)",
        "",
        "[monitors]",
    ]
    for m in p.monitors:
        lines.append(f"# {m.how}")
        lines.append(f"{m.name} = [{m.atoms[0]}, {m.atoms[1]}]")
    for b in p.basins:
        lines += ["", f"# {b.how}", f"[basins.{b.name}]"]
        for k, (m, low) in enumerate(zip(p.monitors, b.pattern)):
            if k not in b.used:
                continue
            lines.append(f"{m.name} = {{ below = {m.below:.2f} }}" if low else f"{m.name} = {{ above = {m.above:.2f} }}")
    return "\n".join(lines) + "\n"
