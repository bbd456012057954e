"""The per-run work as a pure function: any split of a set into batches, gathered in any order, gives the set
and the table that a local open and classification give (compared exactly), without Dask."""

from __future__ import annotations

import pickle

import pandas as pd
import pytest

from basinmark.core.classify import classify_set
from basinmark.core.rules import parse_rules
from basinmark.core.run_task import BatchResult, assemble, assemble_table, classify_runs
from basinmark.core.sets import discover, open_set

from tests.generated_runs import DAMAGED, OTHER_ATOMS, write_generated_set
from tests.rules_examples import SCHEMA_EXAMPLE

OVERLAP = SCHEMA_EXAMPLE.replace('name = "ringfork"', 'name = "ringfork"\nallow_overlap = true').replace(
    "[basins.beta]\nr_a = { below = 1.75 }\nr_c = { below = 1.75 }\nr_b = { above = 2.3 }",
    "[basins.beta]\nr_a = { below = 1.75 }")  # beta now holds wherever alpha does


@pytest.fixture(scope="module")
def made(tmp_path_factory):
    root = tmp_path_factory.mktemp("runtask") / "set"
    info = write_generated_set(root, 24, SCHEMA_EXAMPLE)
    return root, info


def _local(root, rules):
    tset = open_set(root, use_cache=False)
    return tset, classify_set(tset, rules)


def _batched(root, rules, size):
    plan = discover(root)
    parts = [classify_runs(plan.runs[i:i + size], plan.layout, rules) for i in range(0, len(plan.runs), size)]
    parts = [pickle.loads(pickle.dumps(p)) for p in reversed(parts)]  # as from another machine, in any order
    tset = assemble(plan, parts)
    return tset, assemble_table(tset, parts, rules)


@pytest.mark.parametrize("rules_text", [SCHEMA_EXAMPLE, OVERLAP], ids=["plain", "overlap"])
@pytest.mark.parametrize("size", [1, 5, 100])
def test_batches_give_the_local_table(made, rules_text, size):
    root, _ = made
    rules = parse_rules(rules_text)
    tset, table = _local(root, rules)
    tset2, table2 = _batched(root, rules, size)
    pd.testing.assert_frame_equal(table2, table, check_exact=True)
    assert table2.attrs == table.attrs
    assert len(set(table["outcome"])) >= 4 and table["time_gap_fs"].notna().any()  # a varied set
    if rules.allow_overlap:
        assert any("both hold" in n for n in table.attrs["notes"])
    assert list(tset2.runs) == list(tset.runs)
    assert tset2.content_hashes() == tset.content_hashes()
    assert tset2.warnings == tset.warnings and tset2.notes == tset.notes and tset2.name == tset.name
    assert sorted(map(str, tset2.failures)) == sorted(map(str, tset.failures))
    assert [str(f) for f in tset2.left_out] == [str(f) for f in tset.left_out]


def test_a_damaged_file_fails_with_its_line_and_the_rest_classify(made):
    root, info = made
    plan = discover(root)
    specs = [s for s in plan.runs if s.run_id in (DAMAGED, "run-0001", OTHER_ATOMS)]
    part = classify_runs(specs, plan.layout, parse_rules(SCHEMA_EXAMPLE))
    assert [rid for rid, _ in part.failures] == [DAMAGED]
    failure = part.failures[0][1]
    assert failure.path == info["damaged"] and failure.line == info["line"]
    assert f"line {info['line']}" in str(failure)
    assert list(part.table["run"]) == ["run-0001"]
    # too few atoms for the rules: no row, and the reason kept for the client (the run is left out there)
    assert "atom 9 is out of range" in part.unclassified[OTHER_ATOMS]


def test_outlines_carry_no_coordinates(made):
    root, _ = made
    plan = discover(root)
    part = classify_runs(plan.runs[:2], plan.layout, parse_rules(SCHEMA_EXAMPLE))
    traj = part.outlines[0].trajectory()
    assert traj.positions.shape == (201, 9, 3) and traj.positions.strides == (0, 0, 0)
    assert set(traj.energies) == {"potential", "kinetic", "total"}
    assert len(pickle.dumps(part.outlines[0])) < 4000  # small: no frames travel back


def test_an_empty_batch_result_is_harmless(made):
    root, _ = made
    plan = discover(root)
    rules = parse_rules(SCHEMA_EXAMPLE)
    parts = [BatchResult(), classify_runs(plan.runs, plan.layout, rules)]
    tset = assemble(plan, parts)
    assert len(assemble_table(tset, parts, rules)) == len(tset)
