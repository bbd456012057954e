"""Classification on constructed runs with known answers, against a plain-loop reference, and determinism."""

from __future__ import annotations

import io
import json
import math

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, strategies as st

from basinmark.core.classify import (TABLE_COLUMNS, ClassificationCancelled, basin_membership, classify_prepared,
                                     classify_run, classify_set, mark_changed, outcome_counts, prepare,
                                     write_automatic_labels)
from basinmark.core.model import SourceFile, Trajectory, TrajectorySet
from basinmark.core.rules import parse_rules
from basinmark.core.units import energy_factor

from rules_examples import SCHEMA_EXAMPLE  # noqa: E402

RULES = SCHEMA_EXAMPLE

# monitor values (r_a, r_b, r_c) in Å that put a frame in each basin, or in none
R, A, B, N = (3.0, 3.0, 3.0), (1.5, 1.5, 3.0), (1.5, 3.0, 1.5), (2.0, 2.0, 2.0)


def place(ra, rb, rc) -> np.ndarray:
    """Positions (F, 9, 3) whose monitors r_a=|1-6|, r_b=|2-9|, r_c=|4-9| (1-based) are the given series."""
    ra, rb, rc = (np.asarray(x, dtype=np.float64) for x in (ra, rb, rc))
    f = ra.size
    pos = np.zeros((f, 9, 3))
    for k in range(9):
        pos[:, k] = [30.0 * (k + 1), 80.0, 0.0]  # spectators far away
    pos[:, 0] = [0.0, 0.0, 0.0]
    pos[:, 5] = np.stack([ra, np.zeros(f), np.zeros(f)], axis=1)
    pos[:, 8] = [0.0, 20.0, 0.0]
    pos[:, 1] = np.stack([rb, np.full(f, 20.0), np.zeros(f)], axis=1)
    pos[:, 3] = np.stack([np.zeros(f), 20.0 + rc, np.zeros(f)], axis=1)
    return pos


def make_run(run_id: str, pieces, t0=-200.0, t1=200.0, dt=1.0, times=None, energies=None) -> Trajectory:
    """A run whose state is ``pieces[k][1]`` from time ``pieces[k][0]`` on (first piece from -inf)."""
    t = np.arange(round((t1 - t0) / dt) + 1) * dt + t0 if times is None else np.asarray(times, float)
    vals = np.empty((t.size, 3))
    for start, state in pieces:
        vals[t >= start - 1e-9] = state
    src = (SourceFile(path=f"{run_id}.xyz", sha256=f"{abs(hash(run_id)):064x}"[:64]),)
    return Trajectory(run_id, [6] * 9, place(*vals.T), t, energies=energies or {}, sources=src)


INF = -math.inf
CASES = {
    # run id: (pieces, outcome, backward, forward, forward commit, backward commit, flags)
    "to_alpha": ([(INF, R), (-60, N), (40, A)], "alpha", "reactant", "alpha", 40.0, -61.0, []),
    "to_beta": ([(INF, R), (-60, N), (40, B)], "beta", "reactant", "beta", 40.0, -61.0, []),
    "reversed": ([(INF, B), (-50, N), (30, R)], "beta", "beta", "reactant", 30.0, -51.0, []),
    "recross": ([(INF, R), (-50, N), (30, R)], "recrossing", "reactant", "reactant", 30.0, -51.0, []),
    "unfinished": ([(INF, R), (-50, N)], "unfinished", "reactant", None, None, -51.0, []),
    "late": ([(INF, R), (-50, N), (170, A)], "alpha", "reactant", "alpha", 170.0, -51.0, ["late_commit"]),
    "wanderer": ([(INF, R), (-50, N), (20, A), (60, N), (90, B)], "beta", "reactant", "beta", 90.0, -51.0,
                 ["several_visits"]),
    "came_back": ([(INF, R), (-50, N), (20, A), (60, N), (90, A)], "alpha", "reactant", "alpha", 90.0, -51.0,
                  ["several_visits"]),
    "dwell_exact": ([(INF, R), (-50, N), (180, A)], "alpha", "reactant", "alpha", 180.0, -51.0, ["late_commit"]),
    "dwell_short": ([(INF, R), (-50, N), (181, A)], "unfinished", "reactant", None, None, -51.0, []),
    "two_products": ([(INF, A), (-50, N), (30, B)], "ambiguous", "alpha", "beta", 30.0, -51.0, []),
    # in a basin at the TS frame: the backward half's one frame in alpha is too short to be a visit
    "at_ts": ([(INF, R), (0, A)], "alpha", "reactant", "alpha", 0.0, -1.0, []),
    # threshold jitter: out of alpha for 10 fs (< dwell) is no second visit; the later entry is the commit
    "jitter": ([(INF, R), (-50, N), (40, A), (70, N), (80, A)], "alpha", "reactant", "alpha", 80.0, -51.0, []),
    # a 10 fs stay in beta on the way is no visit either
    "passing": ([(INF, R), (-50, N), (30, B), (40, N), (60, A)], "alpha", "reactant", "alpha", 60.0, -51.0, []),
    # the backward half stays 50 fs in the reactant, then goes on to beta: two visits
    "bwd_wanderer": ([(INF, B), (-150, N), (-100, R), (-50, N), (40, R)], "beta", "beta", "reactant", 40.0,
                     -151.0, ["late_commit", "several_visits"]),
    # a late commit at the reactant end is no late commit: late_commit looks at the product end
    "bwd_dwell_exact": ([(INF, R), (-179, N), (30, A)], "alpha", "reactant", "alpha", 30.0, -180.0, []),
    "bwd_dwell_short": ([(INF, R), (-180, N), (30, A)], "unfinished", None, "alpha", 30.0, None, []),
}


@pytest.fixture(scope="module")
def rules():
    return parse_rules(RULES)


@pytest.mark.parametrize("run_id", list(CASES))
def test_known_answers(rules, run_id):
    pieces, outcome, bwd, fwd, commit, bcommit, flags = CASES[run_id]
    res = classify_run(make_run(run_id, pieces), rules)
    assert res.outcome == outcome
    assert (res.backward_basin, res.forward_basin) == (bwd, fwd)
    assert res.forward_commit_time_fs == (None if commit is None else pytest.approx(commit))
    assert res.backward_commit_time_fs == (None if bcommit is None else pytest.approx(bcommit))
    assert res.flags == flags
    assert res.basin_track.shape == (401,) and res.basin_track.dtype == np.int16
    assert set(res.monitors) == {"r_a", "r_b", "r_c"}


def test_monitor_series_are_what_was_built(rules):
    res = classify_run(make_run("x", [(INF, R), (0, A)]), rules)
    assert res.monitors["r_a"][0] == pytest.approx(3.0) and res.monitors["r_b"][-1] == pytest.approx(1.5)
    assert list(res.basin_track[[0, 199, 200, 400]]) == [0, 0, 1, 1]


def test_dwell_boundary_with_float_time_steps(rules):
    # 0.1 fs steps: times are not exact multiples, the dwell of exactly 20 fs must still count
    times = np.arange(-2000, 2001) * 0.1
    ok = classify_run(make_run("f", [(INF, R), (-50, N), (179.95, A)], times=times), rules)
    assert ok.outcome == "alpha" and ok.product_final_entry_fs == pytest.approx(180.0)
    short = classify_run(make_run("g", [(INF, R), (-50, N), (180.05, A)], times=times), rules)
    assert short.outcome == "unfinished"


def test_zero_dwell_commits_on_one_frame():
    r = parse_rules(RULES.replace("dwell_fs = 20.0", "dwell_fs = 0.0"))
    res = classify_run(make_run("z", [(INF, R), (-50, N), (200, A)]), r)
    assert res.outcome == "alpha" and res.forward_commit_time_fs == 200.0


def test_energy_drift_flag_and_note(rules):
    kcal = energy_factor("kcal/mol")
    t = np.arange(-200.0, 201.0)
    pieces = [(INF, R), (-60, N), (40, A)]
    for drift, flagged in ((2.0, True), (0.5, False)):
        epot = -10.0 + drift * kcal * (t > 100)
        res = classify_run(make_run("e", pieces, energies={"potential": epot, "kinetic": np.zeros_like(t)}), rules)
        assert ("energy_drift" in res.flags) is flagged
    table = classify_set([make_run("noe", pieces)], rules)
    assert "energy drift was not checked" in table.attrs["notes"][0]


def test_short_run(rules):
    res = classify_run(make_run("s", [(INF, R), (-25, N), (10, A)], t0=-50.0), rules)
    assert res.flags == ["short_run"] and res.outcome == "alpha"


def test_conflicting_basins_when_overlap_allowed():
    text = """allow_overlap = true
reactant = "reactant"
dwell_fs = 20.0
[monitors]
r_a = [1, 6]
r_b = [2, 9]
[basins.reactant]
r_a = { above = 2.6 }
[basins.alpha]
r_a = { below = 1.75 }
[basins.beta]
r_a = { below = 1.75 }
r_b = { above = 2.3 }
"""
    r = parse_rules(text)
    assert r.overlaps()
    both = (1.5, 3.0, 3.0)  # r_a short and r_b long: alpha and beta hold at once
    mid = classify_run(make_run("m", [(INF, R), (-50, N), (20, both), (40, A)]), r)
    assert mid.outcome == "alpha" and "conflicting_basins" in mid.flags
    assert mid.conflict.sum() == 20 and np.all(mid.basin_track[mid.conflict] == -1)
    end = classify_run(make_run("n", [(INF, R), (-50, N), (20, both)]), r)
    assert end.outcome == "ambiguous" and "conflicting_basins" in end.flags


def test_basin_membership_counts():
    r = parse_rules(RULES)
    mons = {"r_a": np.array([3.0, 1.5, 1.5, 2.0]), "r_b": np.array([3.0, 1.5, 3.0, 2.0]),
            "r_c": np.array([3.0, 3.0, 1.5, 2.0])}
    track, conflict = basin_membership(mons, r)
    assert list(track) == [0, 1, 2, -1] and not conflict.any()


def test_classify_set_table_and_determinism(rules):
    runs = [make_run(k, v[0]) for k, v in CASES.items()]
    tset = TrajectorySet(root="/nowhere", runs={t.run_id: t for t in runs})
    t1 = classify_set(tset, rules)
    t2 = classify_set(tset, rules)
    assert list(t1.columns) == TABLE_COLUMNS
    pd.testing.assert_frame_equal(t1, t2)
    assert t1.attrs["rules_sha256"] == rules.sha256
    for row in t1.itertuples(index=False):
        one = classify_run(tset[row.run], rules)
        assert row.outcome == one.outcome == CASES[row.run][1]
        assert row.flags == ";".join(one.flags)
        assert row.content_hash == tset[row.run].content_hash
    # order of runs does not change any run's result
    rev = classify_set(list(reversed(runs)), rules).set_index("run").loc[t1["run"]].reset_index()
    pd.testing.assert_frame_equal(rev, t1, check_like=True)
    counts = outcome_counts(t1, rules).set_index("outcome")["count"]
    assert counts["alpha"] == 8 and counts["beta"] == 4 and counts["ambiguous"] == 1


def test_progress_and_mark_changed(rules):
    runs = [make_run(f"r{i}", CASES["to_alpha"][0]) for i in range(3)]
    seen, calls = [], []
    table = classify_set(runs, rules, progress=lambda d, n, rid: seen.append((d, n, rid)))
    assert seen == [(1, 3, "r0"), (2, 3, "r1"), (3, 3, "r2")]

    def stop_after_two() -> bool:
        calls.append(1)
        return len(calls) >= 2

    with pytest.raises(ClassificationCancelled, match="after 2 of 3"):
        classify_set(runs, rules, cancel=stop_after_two)
    marked = mark_changed(table, {"r1": "different"})
    assert list(marked["flags"]) == ["", "data_changed", ""]


def test_prepared_monitors_must_match(rules):
    prep = prepare([make_run("x", CASES["to_alpha"][0])], rules)
    more = parse_rules(RULES.replace("r_c = [4, 9]", "r_c = [4, 9]\nr_d = [3, 5]"))
    with pytest.raises(ValueError, match="r_d"):
        classify_prepared(prep, more)
    moved = parse_rules(RULES.replace("r_c = [4, 9]", "r_c = [3, 9]"))
    with pytest.raises(ValueError, match="r_c"):
        classify_prepared(prep, moved)


def test_empty_set(rules):
    table = classify_set([], rules)
    assert list(table.columns) == TABLE_COLUMNS and len(table) == 0


def test_too_few_atoms(rules):
    t = Trajectory("tiny", [6, 6], np.zeros((3, 2, 3)), [-1.0, 0.0, 1.0])
    with pytest.raises(Exception, match="atom"):
        classify_run(t, rules)


# --- against a plain-loop reference ----------------------------------------------------------------

def _ref_visits(track, times, order, dwell):
    """Walk a half from the TS: stays of >= dwell count, same-basin stays < dwell apart merge."""
    stays, k = [], 0
    while k < len(order):
        j = k
        while j + 1 < len(order) and track[order[j + 1]] == track[order[k]]:
            j += 1
        if track[order[k]] >= 0 and abs(times[order[j]] - times[order[k]]) >= dwell - 1e-6:
            stays.append((track[order[k]], times[order[k]], times[order[j]]))
        k = j + 1
    visits = 0
    for n, (b, t_in, _) in enumerate(stays):
        if n and stays[n - 1][0] == b and abs(t_in - stays[n - 1][2]) < dwell - 1e-6:
            continue
        visits += 1
    return visits


def _reference(track, times, ts, dwell, late):
    e = len(track) - 1
    k = e
    while k - 1 >= ts and track[k - 1] == track[e]:
        k -= 1
    fwd = int(track[e]) if track[e] >= 0 and times[e] - times[k] >= dwell - 1e-6 else None
    fc = times[k] if fwd is not None else None
    k = 0
    while k + 1 <= ts and track[k + 1] == track[0]:
        k += 1
    bwd = int(track[0]) if track[0] >= 0 and times[k] - times[0] >= dwell - 1e-6 else None
    bc = times[k] if bwd is not None else None
    fv = _ref_visits(track, times, list(range(ts, e + 1)), dwell)
    bv = _ref_visits(track, times, list(range(ts, -1, -1)), dwell)
    ff = _ref_first_arrival(track, times, list(range(ts, e + 1)), dwell, fwd)
    bf = _ref_first_arrival(track, times, list(range(ts, -1, -1)), dwell, bwd)
    # the product end: the one end committed to a product (basin index 0 is the reactant)
    f_prod, b_prod = fwd is not None and fwd != 0, bwd is not None and bwd != 0
    product = (abs(fc), ff) if f_prod and not b_prod else (abs(bc), bf) if b_prod and not f_prod else None
    f_re, b_re = fwd == 0, bwd == 0
    reactant = (abs(fc), ff) if f_re and not b_re else (abs(bc), bf) if b_re and not f_re else None
    flags = []
    if product is not None and product[0] > late:
        flags.append("late_commit")
    if fv > 1 or bv > 1:
        flags.append("several_visits")
    return bwd, fwd, fc, bc, flags, product, reactant


def _ref_first_arrival(track, times, order, dwell, basin):
    """Walk a half from the TS: the first frame in ``basin`` after the last stay of >= dwell elsewhere."""
    if basin is None:
        return None
    first = None
    k = 0
    while k < len(order):
        j = k
        while j + 1 < len(order) and track[order[j + 1]] == track[order[k]]:
            j += 1
        b = track[order[k]]
        if b == basin and first is None:
            first = abs(times[order[k]])
        elif b >= 0 and b != basin and abs(times[order[j]] - times[order[k]]) >= dwell - 1e-6:
            first = None  # a visit elsewhere: the arrival must come after it
        k = j + 1
    return first


run_strategy = st.tuples(
    st.lists(st.sampled_from([R, A, B, N]), min_size=1, max_size=25),
    st.lists(st.sampled_from([0.5, 1.0, 2.0, 3.0]), min_size=25, max_size=25),
    st.integers(0, 24),
)


@given(st.lists(run_strategy, min_size=1, max_size=6), st.sampled_from([0.0, 1.0, 2.0, 3.5]),
       st.sampled_from([2.0, 5.0, 1000.0]))
def test_vectorised_matches_reference(specs, dwell, late):
    text = RULES.replace("dwell_fs = 20.0", f"dwell_fs = {dwell}").replace("late_commit_fs = 150.0",
                                                                            f"late_commit_fs = {late}")
    text = text.replace("min_length_fs = 100.0\n", "")
    r = parse_rules(text)
    runs, refs = [], []
    names = r.basin_names
    for k, (states, steps, ts) in enumerate(specs):
        f = len(states)
        ts = min(ts, f - 1)
        t = np.concatenate([[0.0], np.cumsum(steps[: f - 1])])
        t = t - t[ts]
        vals = np.array(states)
        run = Trajectory(f"run{k}", [6] * 9, place(*vals.T), t)
        runs.append(run)
        track = [([R, A, B].index(s) if s != N else -1) for s in states]
        refs.append(_reference(track, t, ts, dwell, late))
    prep = prepare(runs, r)
    res = classify_prepared(prep, r)
    for k, (bwd, fwd, fc, bc, flags, product, reactant) in enumerate(refs):
        assert res.backward_basin[k] == (None if bwd is None else names[bwd])
        assert res.forward_basin[k] == (None if fwd is None else names[fwd])
        assert (np.isnan(res.forward_commit_time_fs[k]) if fc is None else res.forward_commit_time_fs[k] == fc)
        assert (np.isnan(res.backward_commit_time_fs[k]) if bc is None else res.backward_commit_time_fs[k] == bc)
        for side, want in (("product", product), ("reactant", reactant)):
            final, first = getattr(res, f"{side}_final_entry_fs")[k], getattr(res, f"{side}_first_arrival_fs")[k]
            if want is None:
                assert np.isnan(final) and np.isnan(first)
            else:
                assert (final, first) == want
        assert res.flags[k] == flags


# --- journal ------------------------------------------------------------------------------------------

def test_write_automatic_labels(tmp_path, rules):
    journal_mod = pytest.importorskip("basinmark.core.journal")
    runs = [make_run(k, CASES[k][0]) for k in ("to_alpha", "to_beta", "late")]
    table = classify_set(runs, rules)
    with journal_mod.LabelJournal.open(tmp_path / "labels.jsonl", labeler="tester") as j:
        n = write_automatic_labels(j, table, rules)
        assert n == 3
        state = j.state().set_index("run")
        assert state.loc["to_beta", "auto_label"] == "beta"
        assert state.loc["late", "auto_label"] == "alpha"
        ev = [e for e in j.events if e.get("run") == "late"][-1]
        assert ev["rules_hash"] == rules.sha256 and ev["source"] == "rule"
        assert "late_commit" in ev["reason"]
        assert ev["content_hash"] == runs[2].content_hash
        # the same rules on the same runs again: nothing new is written
        assert write_automatic_labels(j, table, rules) == 0
        # other rules (another file hash): every run is written again, recording the new hash
        import dataclasses

        other = dataclasses.replace(rules, sha256="0" * 64)
        assert write_automatic_labels(j, table, other) == 3
        assert [e for e in j.events if e.get("run") == "late"][-1]["rules_hash"] == "0" * 64
        # an undone automatic label no longer counts: classifying again records it anew
        j.undo("late", reason="test")
        assert j.auto_event("late")["rules_hash"] == rules.sha256
        assert write_automatic_labels(j, table, other) == 1
        assert j.auto_event("late")["rules_hash"] == "0" * 64


# --- command line -------------------------------------------------------------------------------------

def write_set(root, runs, rules_text: str = RULES):
    """Write runs as joined plain-XYZ files with time/epot/ekin comment keys, plus basins.toml."""
    root.mkdir(parents=True, exist_ok=True)
    (root / "basins.toml").write_text(rules_text, encoding="utf-8")
    for t in runs:
        lines = []
        for i in range(t.n_frames):
            lines.append(f"{t.n_atoms}\ntime={float(t.times[i])!r} epot=-10.0 ekin=0.5")
            lines += [f"C {x:.6f} {y:.6f} {z:.6f}" for x, y, z in t.positions[i]]
        (root / f"{t.run_id}.xyz").write_text("\n".join(lines) + "\n", encoding="ascii")
    return root


def test_cli_classify(tmp_path, capsys):
    from basinmark.cli import main

    runs = [make_run(k, CASES[k][0], dt=2.0) for k in ("to_alpha", "to_beta", "late", "unfinished")]
    root = write_set(tmp_path / "set", runs)
    assert main(["classify", str(root), "--dry-run", "-q"]) == 0
    out = capsys.readouterr().out
    assert "dry run: nothing written" in out and "late_commit" in out
    assert not (root / "basinmark-labels.jsonl").exists()
    assert main(["classify", str(root), "-q", "--format", "json"]) == 0
    doc = json.loads(capsys.readouterr().out)
    assert {c["outcome"]: c["count"] for c in doc["counts"]}["alpha"] == 2
    assert doc["written"] == 4 and [f["run"] for f in doc["flagged"]] == ["late"]
    assert any("rough guide" in w for w in doc["warnings"])  # too few runs is said plainly
    assert (root / "basinmark-labels.jsonl").is_file()
    assert main(["classify", str(root), "-q", "--format", "csv", "--dry-run"]) == 0
    csv = pd.read_csv(io.StringIO(capsys.readouterr().out))
    assert list(csv.columns) == TABLE_COLUMNS and len(csv) == 4


def test_cli_classify_bad_input(tmp_path, capsys):
    from basinmark.cli import main

    root = write_set(tmp_path / "set", [make_run("a", CASES["to_alpha"][0], dt=4.0)],
                     RULES.replace("r_c = [4, 9]", "r_c = [4, 19]"))
    assert main(["classify", str(root), "-q"]) == 2
    err = capsys.readouterr().err
    assert "basins.toml" in err and "monitors.r_c" in err and "19" in err
    assert main(["classify", str(tmp_path / "nothing"), "-q"]) == 2
    assert "not a folder" in capsys.readouterr().err
    (root / "basins.toml").write_text("dwell_fs = [", encoding="utf-8")
    assert main(["classify", str(root), "-q"]) == 2
    assert "line 1" in capsys.readouterr().err
