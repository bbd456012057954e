"""Property: whatever the half-name convention, the pairing finds exactly the runs that were written."""

from __future__ import annotations

import tempfile
from pathlib import Path

from hypothesis import given, settings, strategies as st

from basinmark.core.pairing import find_by_names

WORDS = st.sampled_from([("fwd", "bwd"), ("forward", "backward"), ("fw", "bw"), ("fwd", "back"), ("fwd", "rev"),
                         ("forwards", "backwards"), ("fwd", "reverse")])
CASE = st.sampled_from([str.lower, str.upper, str.capitalize])
IDS = st.lists(st.tuples(st.sampled_from(["run", "traj", "r", "sample-", "job_", "T"]), st.integers(0, 9999)),
               min_size=1, max_size=12, unique=True)
SUFFIX = st.sampled_from([".xyz", ".xyz.gz", ".extxyz", ".extxyz.bz2", ".traj", ".XYZ"])


def _touch(path: Path) -> None:
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_bytes(b"")


@settings(max_examples=30)
@given(ids=IDS, words=WORDS, case=CASE, sep=st.sampled_from([".", "_", "-"]), at_end=st.booleans(),
       suffix=SUFFIX, folder=st.sampled_from([".", "runs"]))
def test_names_with_a_direction_word_pair_into_the_runs_written(ids, words, case, sep, at_end, suffix, folder):
    runs = {f"{p}{n:03d}" for p, n in ids}
    with tempfile.TemporaryDirectory() as tmp:
        root = Path(tmp)
        for rid in runs:
            for word in words:
                name = f"{rid}{sep}{case(word)}" if at_end else f"{case(word)}{sep}{rid}"
                _touch(root / folder / f"{name}{suffix}")
        _touch(root / folder / f"ts{suffix}")  # a joined candidate, not a half
        found = find_by_names(root, [".", "runs"])
        halves = {s.run_id: s for s in found.runs if s.joined is None}
        assert set(halves) == runs
        for rid, spec in halves.items():
            assert case(words[0]) in spec.forward.name and case(words[1]) in spec.backward.name
        assert found.left_out == []


@settings(max_examples=20)
@given(ids=IDS, words=WORDS, case=CASE, suffix=SUFFIX)
def test_one_folder_per_run_names_each_run_after_its_folder(ids, words, case, suffix):
    runs = {f"{p}{n:03d}" for p, n in ids}
    with tempfile.TemporaryDirectory() as tmp:
        root = Path(tmp)
        for rid in runs:
            for word in words:
                _touch(root / rid / f"{case(word)}{suffix}")
        found = find_by_names(root, [".", "runs"])
        assert {s.run_id for s in found.runs} == runs
        assert all(s.forward.parent.name == s.run_id == s.backward.parent.name for s in found.runs)
