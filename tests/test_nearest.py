"""Nearest-atom conditions: "atom X's nearest neighbour among a group is atom Y (within d)", and the overlap
report that lists every overlapping pair of basins with a place where both hold."""

from __future__ import annotations

import numpy as np
import pytest
from ase import Atoms
from ase.geometry import get_distances

from basinmark.core.classify import basin_membership, classify_set, prepare
from basinmark.core.geometry import nearest_among
from basinmark.core.model import SourceFile, Trajectory
from basinmark.core.rules import RulesError, parse_rules

# Our own toy: a mobile atom (1) leaves its donor (5) for one of three equivalent acceptors (2, 3, 4)
# sitting at the corners of a triangle; which acceptor it ends on is the product.
ACCEPTORS = {2: np.array([3.0, 0.0, 0.0]), 3: np.array([-1.5, 2.6, 0.0]), 4: np.array([-1.5, -2.6, 0.0])}
DONOR = np.array([0.0, 0.0, 3.2])

RULES = """\
name = "threeway"
reactant = "bound"
dwell_fs = 5.0

[monitors]
d_donor = [1, 5]

[basins.bound]
nearest = { atom = 1, among = [2, 3, 4, 5], is = 5, within = 1.3 }

[basins.on_2]
nearest = { atom = 1, among = [2, 3, 4, 5], is = 2, within = 1.3 }

[basins.on_3]
nearest = { atom = 1, among = [2, 3, 4, 5], is = 3, within = 1.3 }

[basins.on_4]
nearest = { atom = 1, among = [2, 3, 4, 5], is = 4, within = 1.3 }
"""


def _positions(end_bwd: np.ndarray, end_fwd: np.ndarray, n_half: int = 30) -> np.ndarray:
    """Frames (2 n_half + 1, 5, 3): atom 1 moves from ``end_bwd`` through the centre to ``end_fwd``."""
    centre = np.array([0.0, 0.0, 0.8])
    s = np.minimum(1.0, np.linspace(0.0, 1.5, n_half + 1))[:, None]  # the last third rests at the end
    back = centre + (end_bwd - centre) * s  # from the TS outwards, backward
    fwd = centre + (end_fwd - centre) * s
    path = np.concatenate([back[::-1], fwd[1:]])
    pos = np.zeros((path.shape[0], 5, 3))
    pos[:, 0] = path
    for atom, xyz in ACCEPTORS.items():
        pos[:, atom - 1] = xyz
    pos[:, 4] = DONOR
    return pos


def _near(atom: int, distance: float = 1.0) -> np.ndarray:
    """A point ``distance`` Å from acceptor/donor ``atom`` on its way from the centre."""
    xyz = DONOR if atom == 5 else ACCEPTORS[atom]
    centre = np.array([0.0, 0.0, 0.8])
    u = (centre - xyz) / np.linalg.norm(centre - xyz)
    return xyz + distance * u


def _run(run_id: str, bwd_end: np.ndarray, fwd_end: np.ndarray) -> Trajectory:
    pos = _positions(bwd_end, fwd_end)
    t = (np.arange(pos.shape[0]) - (pos.shape[0] // 2)) * 1.0
    src = (SourceFile(path=f"{run_id}.xyz", sha256=f"{abs(hash(run_id)):064x}"[:64]),)
    return Trajectory(run_id, [1, 8, 8, 8, 7], pos, t, sources=src)


def test_nearest_among_matches_ase():
    rng = np.random.default_rng(7)
    pos = rng.uniform(-4, 4, size=(25, 8, 3))
    group = [1, 3, 4, 6]
    idx, dist = nearest_among(pos, 0, group)
    for f in range(pos.shape[0]):
        atoms = Atoms("H8", positions=pos[f])
        # reference: ase.Atoms.get_distance for every group member
        ref = [atoms.get_distance(0, g) for g in group]
        assert idx[f] == group[int(np.argmin(ref))]
        assert dist[f] == pytest.approx(min(ref), rel=1e-12)
        # reference: ase.geometry.get_distances between the atom and the group
        _, d_ref = get_distances(pos[f, [0]], pos[f, group])
        assert dist[f] == pytest.approx(d_ref.min(), rel=1e-12)
    # ties go to the lowest atom number of the group, whatever order it is written in
    tie = np.zeros((1, 4, 3))
    tie[0, 1] = [1.0, 0, 0]
    tie[0, 2] = [-1.0, 0, 0]
    tie[0, 3] = [0, 5.0, 0]
    assert nearest_among(tie, 0, [3, 2, 1])[0][0] == 1


def test_three_acceptor_set_is_classified_exactly():
    rules = parse_rules(RULES)  # no overlap error: the nearest atom is one atom at a time
    assert rules.overlaps() == []
    runs, want = [], {}
    for k, acc in enumerate((2, 3, 4, 2, 3, 4)):
        rid = f"to-{acc}-{k}"
        if k % 2:  # the product at the backward end half of the time
            runs.append(_run(rid, _near(acc), _near(5)))
        else:
            runs.append(_run(rid, _near(5), _near(acc)))
        want[rid] = f"on_{acc}"
    runs.append(_run("back-home", _near(5), _near(5)))
    want["back-home"] = "recrossing"
    # ends 1.6 Å from acceptor 3: nearest is 3 but beyond `within` -> no basin -> unfinished
    runs.append(_run("too-far", _near(5), _near(3, 1.6)))
    want["too-far"] = "unfinished"
    table = classify_set(runs, rules).set_index("run")
    assert table["outcome"].to_dict() == want
    # the geometry behind it, checked frame by frame against ase.Atoms.get_distance
    prep = prepare(runs, rules)
    track, conflict = basin_membership(prep.monitors, rules)
    assert not conflict.any()
    names = rules.basin_names
    for k, run in enumerate(runs):
        for f in range(run.n_frames):
            atoms = Atoms(numbers=run.numbers, positions=run.positions[f])
            d = {a: atoms.get_distance(0, a - 1) for a in (2, 3, 4, 5)}
            best = min(d, key=d.get)
            expected = names.index({5: "bound", 2: "on_2", 3: "on_3", 4: "on_4"}[best]) if d[best] < 1.3 else -1
            assert track[prep.starts[k] + f] == expected


def test_nearest_round_trip_and_description():
    rules = parse_rules(RULES)
    again = parse_rules(rules.to_toml())
    assert again == rules
    c = rules.basins["on_3"].nearest[0]
    assert (c.atom, c.among, c.is_, c.within) == (1, (2, 3, 4, 5), 3, 1.3)
    assert "nearest" in rules.basins["on_3"].describe() and "3" in rules.basins["on_3"].describe()
    # several nearest conditions in one basin: a list of tables
    two = RULES.replace("[basins.on_4]\nnearest = { atom = 1, among = [2, 3, 4, 5], is = 4, within = 1.3 }",
                        "[basins.on_4]\nnearest = [{ atom = 1, among = [2, 3, 4, 5], is = 4 }, "
                        "{ atom = 5, among = [2, 3, 4], is = 4 }]")
    r2 = parse_rules(two)
    assert len(r2.basins["on_4"].nearest) == 2 and parse_rules(r2.to_toml()) == r2


@pytest.mark.parametrize("old, new, words", [
    ("is = 3, within", "is = 1, within", "is"),  # the atom itself is not among the group
    ("is = 3, within", "is = 6, within", "among"),  # `is` must be one of the group
    ("among = [2, 3, 4, 5], is = 3", "among = [3], is = 3", "two"),
    ("within = 1.3 }\n\n[basins.on_4]", "witin = 1.3 }\n\n[basins.on_4]", "did you mean within?"),
    ("among = [2, 3, 4, 5], is = 3", "among = [2, 3, 3, 5], is = 3", "twice"),
    ("within = 1.3 }\n\n[basins.on_4]", "within = -1.0 }\n\n[basins.on_4]", "within"),
])
def test_nearest_validation(old, new, words):
    text = RULES.replace(old, new, 1) if "is = 1" not in new else RULES.replace(
        "among = [2, 3, 4, 5], is = 3", "among = [1, 2, 3, 4, 5], is = 3", 1)
    assert old in RULES
    with pytest.raises(RulesError) as ei:
        parse_rules(text)
    assert words in str(ei.value) and ei.value.line is not None


def test_nearest_atoms_are_checked_against_the_set():
    with pytest.raises(RulesError, match="atom 5"):
        parse_rules(RULES, n_atoms=4)


# --- the overlap report ----------------------------------------------------------------------------

OVERLAPPING = """\
reactant = "r"
dwell_fs = 5.0

[monitors]
x = [1, 2]
y = [1, 3]

[basins.r]
x = { above = 3.0 }

[basins.p]
x = { below = 2.0 }

[basins.q]
x = { below = 2.5 }
y = { below = 1.8 }

[basins.s]
y = { between = [1.0, 1.5] }
"""


def test_overlap_error_lists_every_pair_with_a_place_where_both_hold():
    with pytest.raises(RulesError) as ei:
        parse_rules(OVERLAPPING)
    msg = str(ei.value)
    rules = parse_rules("allow_overlap = true\n" + OVERLAPPING)
    pairs = rules.overlap_pairs()
    assert {(p.first, p.second) for p in pairs} == {("p", "q"), ("p", "s"), ("q", "s"), ("r", "s")}
    for p in pairs:
        assert f"{p.first!r} and {p.second!r}" in msg
        # the example really lies in both basins (evaluated by the classifier's own membership test)
        values = {m: np.array([v]) for m, v in p.example.items()}
        for m in rules.monitors:
            values.setdefault(m, np.array([100.0]))  # a monitor neither basin uses: any value
        held = [all(c.holds(values[c.monitor])[0] for c in rules.basins[b].conditions) for b in (p.first, p.second)]
        assert held == [True, True], p
        assert "e.g." in msg
    assert "4 pairs" in msg
    # what allow_overlap does to the counts, said plainly
    assert "allow_overlap = true" in msg and "neither" in msg and "ambiguous" in msg


def _xy_run(run_id: str, xs, ys) -> Trajectory:
    xs, ys = np.asarray(xs, float), np.asarray(ys, float)
    pos = np.zeros((xs.size, 3, 3))
    pos[:, 1, 0] = xs
    pos[:, 2, 1] = ys
    t = np.arange(xs.size) - xs.size // 2
    return Trajectory(run_id, [6, 6, 6], pos, t.astype(float))


def test_allowed_overlap_names_a_real_frame_and_what_it_did():
    rules = parse_rules("allow_overlap = true\n" + OVERLAPPING)
    # backward end in r (x = 4, y = 4); forward end at x = 1.9, y = 1.7: in p and q at once
    n = 21
    xs = np.concatenate([np.full(10, 4.0), [2.7], np.full(10, 1.9)])
    ys = np.concatenate([np.full(10, 4.0), [2.7], np.full(10, 1.7)])
    clean = _xy_run("clean", np.concatenate([np.full(10, 4.0), [2.7], np.full(10, 1.9)]), np.full(n, 4.0))
    table = classify_set([_xy_run("both", xs, ys), clean], rules)
    assert table.set_index("run").loc["both", "outcome"] == "ambiguous"
    assert table.set_index("run").loc["clean", "outcome"] == "p"
    notes = " ".join(table.attrs["notes"])
    assert "'p' and 'q'" in notes and "run both" in notes and "1.0 fs" in notes  # first frame where both hold
    assert "10 frames" in notes and "1 run" in notes and "ambiguous" in notes


def test_map_names_nearest_conditions_it_cannot_draw():
    from basinmark.gui.map_data import basin_regions

    text = RULES.replace("[monitors]\nd_donor = [1, 5]", "[monitors]\nd_donor = [1, 5]\nd_two = [1, 2]").replace(
        "[basins.on_2]\n", "[basins.on_2]\nd_donor = { above = 2.0 }\n")
    regions = basin_regions(parse_rules(text), "d_donor", "d_two")
    (on_2,) = [r for r in regions if r.basin == "on_2"]
    assert any("nearest" in e and "atom 2" in e for e in on_2.elsewhere)
