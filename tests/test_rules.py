"""Rules file: loading, each validation error naming its key, TOML round trip, no code evaluation."""

from __future__ import annotations

import hashlib
import tomllib
from pathlib import Path

import pytest
from hypothesis import given, settings, strategies as st

from basinmark.core.rules import (RESERVED_LABELS, Rules, RulesError, basin_name_problem, load_rules,  # noqa: F401
                                  parse_rules)

from rules_examples import SCHEMA_EXAMPLE  # noqa: E402

GOOD = SCHEMA_EXAMPLE


def test_load_good(tmp_path: Path):
    p = tmp_path / "basins.toml"
    p.write_text(GOOD, encoding="utf-8")
    r = load_rules(p, n_atoms=9)
    assert r.name == "ringfork"
    assert r.basin_names == ["reactant", "alpha", "beta"]
    assert r.products == ["alpha", "beta"]
    assert r.outcome_labels == ["alpha", "beta", "recrossing", "unfinished"]
    assert r.monitors["r_b"].atoms == (2, 9) and r.monitors["r_b"].indices == (1, 8)
    assert r.monitors["r_b"].kind == "distance"
    # FIPS 180-4 SHA-256 via hashlib over the file's bytes
    assert r.sha256 == hashlib.sha256(GOOD.encode()).hexdigest()
    assert r.path == p
    assert r.flags.late_commit_fs == 150.0 and r.flags.energy_unit == "kcal/mol"
    assert r.time_gap.bonds == ("r_a", "r_b") and r.time_gap.concerted_fs == 60.0
    assert r.warnings == ()


def test_condition_semantics():
    r = parse_rules(GOOD)
    below = r.basins["alpha"].condition("r_a")
    above = r.basins["reactant"].condition("r_a")
    assert list(below.holds([1.74, 1.75, 1.76])) == [True, False, False]  # strict
    assert list(above.holds([2.59, 2.6, 2.61])) == [False, False, True]  # strict
    rb = parse_rules(GOOD.replace("r_a = { above = 2.6 }", "r_a = { between = [2.6, 9.0] }"))
    assert list(rb.basins["reactant"].condition("r_a").holds([2.6, 9.0, 9.01])) == [True, True, False]  # closed


def _err(text: str, **kw) -> RulesError:
    with pytest.raises(RulesError) as info:
        parse_rules(text, source="case.toml", **kw)
    assert "case.toml" in str(info.value)
    return info.value


@pytest.mark.parametrize("old, new, key", [
    ("r_b = { below = 1.75 }\nr_c = { above", "r_z = { below = 1.75 }\nr_c = { above", "basins.alpha.r_z"),
    ("r_b = [2, 9]", "r_b = [2, 9, 4, 5, 6]", "monitors.r_b"),
    ("r_b = [2, 9]", "r_b = [2]", "monitors.r_b"),
    ("r_b = [2, 9]", "r_b = [9, 9]", "monitors.r_b"),
    ("r_b = [2, 9]", "r_b = [0, 9]", "monitors.r_b"),
    ("r_b = [2, 9]", 'r_b = ["2", 9]', "monitors.r_b"),
    ('reactant = "reactant"', 'reactant = "start"', "reactant"),
    ("r_a = { above = 2.6 }", 'r_a = { above = "2.6" }', "basins.reactant.r_a.above"),
    ("r_a = { above = 2.6 }", "r_a = { above = true }", "basins.reactant.r_a.above"),
    ("r_a = { above = 2.6 }", "r_a = { between = [9.0, 2.6] }", "basins.reactant.r_a"),
    ("r_a = { above = 2.6 }", "r_a = { between = [2.6] }", "basins.reactant.r_a.between"),
    ("r_a = { above = 2.6 }", "r_a = { beyond = 2.6 }", "basins.reactant.r_a"),
    ("r_a = { above = 2.6 }", "r_a = { above = 2.6, below = 3.0 }", "basins.reactant.r_a"),
    ("r_a = { above = 2.6 }", "r_a = { below = 0.0 }", "basins.reactant.r_a"),
    ('energy_unit = "kcal/mol"', 'energy_unit = "furlongs"', "flags.energy_unit"),
    ("dwell_fs = 20.0", "dwell_fs = -1.0", "dwell_fs"),
    ("dwell_fs = 20.0", 'dwell_fs = "20"', "dwell_fs"),
    ("late_commit_fs = 150.0", "late_commit_fs = -5.0", "flags.late_commit_fs"),
    ('bonds = ["r_a", "r_b"]', 'bonds = ["r_a", "r_q"]', "time_gap.bonds"),
    ('bonds = ["r_a", "r_b"]', 'bonds = ["r_a"]', "time_gap.bonds"),
    ("form_below = 1.75", "form_below = -1.0", "time_gap.form_below"),
    ("[basins.beta]", "[basins.recrossing]", "basins.recrossing"),
])
def test_invalid_cases_name_the_key(old, new, key):
    assert old in GOOD
    e = _err(GOOD.replace(old, new, 1))
    assert e.key == key
    assert key in str(e)


def test_basin_with_no_conditions():
    e = _err(GOOD.replace("[basins.beta]\nr_a = { below = 1.75 }\nr_c = { below = 1.75 }\nr_b = { above = 2.3 }",
                          "[basins.beta]"))
    assert e.key == "basins.beta" and "no conditions" in e.problem


def test_fewer_than_one_product():
    text = GOOD.split("[basins.alpha]")[0] + "\n[flags]\n"
    e = _err(text)
    assert e.key == "basins" and "product" in e.problem


def test_no_monitors():
    e = _err('reactant = "a"\ndwell_fs = 1.0\n[basins.a]\n')
    assert e.key == "monitors"


def test_atom_out_of_range():
    e = _err(GOOD, n_atoms=8)
    assert e.key in ("monitors.r_b", "monitors.r_c") and "9" in e.problem
    parse_rules(GOOD, n_atoms=9)


def test_overlap_is_explained():
    # beta's r_b now overlaps alpha's; r_c no longer separates them
    text = GOOD.replace("r_c = { below = 1.75 }\nr_b = { above = 2.3 }", "r_b = { below = 2.0 }")
    text = text.replace("r_c = { above = 2.3 }\n", "")
    e = _err(text)
    assert e.key == "basins"
    assert "'alpha'" in e.problem and "'beta'" in e.problem
    assert "r_a < 1.75" in e.problem and "r_b < 1.75" in e.problem
    # the same rules are accepted when overlap is allowed explicitly
    r = parse_rules("allow_overlap = true\n" + text)
    assert r.allow_overlap and r.overlaps()


def test_touching_intervals_do_not_overlap():
    # below 1.75 (strict) and between [1.75, 2.0] share no value
    text = GOOD.replace("r_b = { above = 2.3 }", "r_b = { between = [1.75, 2.0] }")
    text = text.replace("r_c = { below = 1.75 }\n", "").replace("r_c = { above = 2.3 }\n", "")
    r = parse_rules(text)
    assert r.overlaps() == []
    both_closed = text.replace("r_b = { below = 1.75 }", "r_b = { between = [1.0, 1.75] }")
    assert "r_b = 1.75" in _err(both_closed).problem


def test_syntax_error_gives_line():
    text = GOOD.replace("r_c = [4, 9]", "r_c = [4, 9")
    e = _err(text)
    assert e.line is not None and e.line >= 8
    assert "line" in str(e)


def test_semantic_error_line_is_best_effort():
    e = _err(GOOD.replace("r_a = { above = 2.6 }", 'r_a = { above = "x" }'))
    assert e.line == GOOD.splitlines().index("r_a = { above = 2.6 }") + 1


def test_unknown_keys_fail():
    # a misspelt key would silently fall back to a default, so every unknown key is an error
    assert _err("colour = 'teal'\n" + GOOD).key == "colour"
    assert _err(GOOD.replace("[flags]", "[flags]\nbeep = 1")).key == "flags.beep"


def test_code_like_strings_are_never_evaluated(tmp_path: Path):
    marker = tmp_path / "pwned"
    payload = f"__import__('pathlib').Path({str(marker)!r}).write_text('x')"
    text = GOOD.replace("r_a = { above = 2.6 }", 'r_a = { above = "' + payload + '" }')
    e = _err(text)
    assert "must be a number" in e.problem
    assert not marker.exists()
    r = parse_rules(GOOD.replace('name = "ringfork"', f'name = "{payload}"'))
    assert r.name == payload and not marker.exists()  # kept as plain text


def test_round_trip_identical():
    r = parse_rules(GOOD)
    text = r.to_toml()
    r2 = parse_rules(text)
    assert r2 == r
    assert r2.to_toml() == text
    assert tomllib.loads(text)["basins"]["alpha"]["r_a"] == {"below": 1.75}  # reference: tomllib


names = st.text(alphabet=st.characters(codec="utf-8", exclude_categories=("Cs",)), min_size=1, max_size=12)
thresholds = st.floats(0.5, 5.0, allow_nan=False)


@given(st.text(alphabet=st.characters(codec="utf-8", exclude_categories=("Cs",)), max_size=30))
def test_string_writer_reads_back(text):
    from basinmark.core.rules import _str
    assert tomllib.loads(f"k = {_str(text)}")["k"] == text  # reference: tomllib (TOML 1.0)


@settings(max_examples=40)
@given(monitor=names, basin=names, lo=thresholds, width=st.floats(0.01, 3.0), dwell=st.floats(0, 500),
       kind=st.sampled_from(["below", "above", "between"]))
def test_round_trip_property(monitor, basin, lo, width, dwell, kind):
    if basin.casefold() == "start":
        return
    cond = {"below": f"{{ below = {lo!r} }}", "above": f"{{ above = {lo!r} }}",
            "between": f"{{ between = [{lo!r}, {lo + width!r}] }}"}[kind]
    other = {"below": f"{{ above = {lo + width!r} }}", "above": f"{{ below = {lo!r} }}",
             "between": f"{{ above = {lo + 2 * width!r} }}"}[kind]
    from basinmark.core.rules import _key  # the writer's own quoting
    text = (f'reactant = "start"\ndwell_fs = {dwell!r}\n[monitors]\n{_key(monitor)} = [1, 2]\n'
            f"[basins.start]\n{_key(monitor)} = {other}\n[basins.{_key(basin)}]\n{_key(monitor)} = {cond}\n")
    if basin_name_problem(basin) is not None:  # not a possible label: refused at load (test_rules_messages.py)
        with pytest.raises(RulesError, match="basins"):
            parse_rules(text)
        return
    r = parse_rules(text)
    assert parse_rules(r.to_toml()) == r
    assert r.products == [basin]


def test_with_threshold():
    r = parse_rules(GOOD)
    r2 = r.with_threshold("alpha", "r_b", "below", 1.9)
    assert r2.basins["alpha"].condition("r_b").hi == 1.9
    assert r.basins["alpha"].condition("r_b").hi == 1.75  # original untouched
    assert r2 != r and r2.path is None
    assert r2.sha256 == hashlib.sha256(r2.to_toml().encode()).hexdigest()
    assert parse_rules(r2.to_toml()) == r2
    # a between condition: "above" moves lo, "below" moves hi
    rb = parse_rules(GOOD.replace("r_a = { above = 2.6 }", "r_a = { between = [2.6, 9.0] }"))
    c = rb.with_threshold("reactant", "r_a", "above", 3.0).basins["reactant"].condition("r_a")
    assert (c.lo, c.hi) == (3.0, 9.0)
    # a new condition is added where the basin had none on that monitor
    r3 = r.with_threshold("reactant", "r_b", "above", 2.5)
    assert r3.basins["reactant"].condition("r_b").lo == 2.5


def test_with_threshold_errors():
    r = parse_rules(GOOD)
    for args, key in [(("nope", "r_a", "below", 1.0), "basins.nope"),
                      (("alpha", "r_q", "below", 1.0), "basins.alpha.r_q"),
                      (("alpha", "r_a", "sideways", 1.0), "basins.alpha.r_a"),
                      (("alpha", "r_a", "above", 1.0), "basins.alpha.r_a"),
                      (("alpha", "r_a", "below", "1.0"), "basins.alpha.r_a")]:
        with pytest.raises(RulesError) as info:
            r.with_threshold(*args)
        assert info.value.key == key
    # moving alpha's r_a and reactant's r_a into each other overlaps... unless r_b/r_c separate them;
    # the reactant has no r_b/r_c condition, so alpha below 3.0 overlaps reactant above 2.6
    with pytest.raises(RulesError, match="'reactant' and 'alpha'"):
        r.with_threshold("alpha", "r_a", "below", 3.0)
    assert r.with_threshold("alpha", "r_a", "below", 3.0, check=False).overlaps()


def test_defaults_and_angles():
    text = ('reactant = "r"\ndwell_fs = 0\n[monitors]\nang = [1, 2, 3]\ntor = [1, 2, 3, 4]\n'
            "[basins.r]\nang = { below = 100 }\n[basins.p]\nang = { above = 120 }\ntor = { between = [-30, 30] }\n")
    r = parse_rules(text)
    assert r.flags.max_energy_drift == 1.0 and r.flags.late_commit_fs is None and r.time_gap is None
    assert r.monitors["tor"].kind == "dihedral" and r.monitors["ang"].unit == "deg"
    assert parse_rules(r.to_toml()) == r
    e = _err(text.replace("ang = { above = 120 }", "ang = { above = 190 }"))
    assert e.key == "basins.p.ang" and "never hold" in e.problem


def test_reserved_labels_match_journal_vocabulary():
    labels = pytest.importorskip("basinmark.core.labels")
    assert tuple(RESERVED_LABELS) == tuple(labels.FIXED_LABELS)


def test_unreadable_file(tmp_path: Path):
    with pytest.raises(RulesError, match="cannot read"):
        load_rules(tmp_path / "missing.toml")
    bad = tmp_path / "bad.toml"
    bad.write_bytes(b"\xff\xfe")
    with pytest.raises(RulesError, match="UTF-8"):
        load_rules(bad)


def test_rules_are_hashable_and_frozen():
    r = parse_rules(GOOD)
    assert hash(r) == hash(parse_rules(r.to_toml()))
    with pytest.raises(Exception):
        r.dwell_fs = 3.0  # type: ignore[misc]
    assert isinstance(r, Rules)


DOC = Path(__file__).resolve().parents[1] / "docs" / "rules-file.md"


def test_documented_example_loads_and_errors_are_as_documented():
    import re

    doc = DOC.read_text(encoding="utf-8")
    toml = re.search(r"```toml\n(.*?)```", doc, re.S).group(1)
    r = parse_rules(toml, source="basins.toml", n_atoms=12)
    assert r == parse_rules(GOOD)  # the documented file is the one these tests use
    cases = [
        toml.replace("r_b = { below = 1.75 }\nr_c = { above", "r_q = { below = 1.75 }\nr_c = { above"),
        toml.replace("r_c = [4, 9]", "r_c = [4, 19]"),
        toml.replace("r_c = [4, 9]", "r_c = [4, 9"),
    ]
    for text in cases:
        with pytest.raises(RulesError) as info:
            parse_rules(text, source="basins.toml", n_atoms=12)
        assert str(info.value) in doc
    with pytest.raises(RulesError) as info:
        r.with_threshold("alpha", "r_a", "below", 3.0)
    flat = " ".join(doc.split())
    assert info.value.problem.split(". Tighten")[0] in flat


def test_equality_follows_basin_order():
    r = parse_rules(GOOD)
    head, rest = GOOD.split("[basins.alpha]")
    alpha, rest = rest.split("[basins.beta]")
    beta, tail = rest.split("[flags]")
    other = parse_rules(head + "[basins.beta]" + beta + "[basins.alpha]" + alpha + "[flags]" + tail)
    assert other.basins["alpha"] == r.basins["alpha"] and other.basins["beta"] == r.basins["beta"]
    assert other.basin_names == ["reactant", "beta", "alpha"]
    assert other != r  # basin order sets the track indices
    assert parse_rules(GOOD.replace("dwell_fs = 20.0", "dwell_fs = 20")) == r  # 20 and 20.0 are the same value


WRAP = """\
reactant = "cis"
dwell_fs = 2.0
[monitors]
w = [1, 2, 3, 4]
d = [1, 2]
[basins.cis]
w = { between = [-30, 30] }
[basins.trans]
w = { between = [150, -150] }   # across ±180°
"""


def test_a_dihedral_range_across_180_degrees():
    import numpy as np

    rules = parse_rules(WRAP)
    c = rules.basins["trans"].condition("w")
    assert c.wraps and "across ±180°" in c.describe()
    values = np.array([179.0, -179.0, 160.0, -155.0, 0.0, 149.0, -149.0])
    assert list(c.holds(values)) == [True, True, True, True, False, False, False]
    # it reloads identically
    assert parse_rules(rules.to_toml()).basins == rules.basins
    # a range across the seam is only meaningful for a dihedral
    with pytest.raises(RulesError, match="not ordered"):
        parse_rules(WRAP.replace('w = { between = [-30, 30] }', 'd = { between = [3, 1] }'))
    # overlap is found across the seam too: 170..-170 and 175..180 share 175..180
    with pytest.raises(RulesError, match="trans.*other|other.*trans"):
        parse_rules(WRAP + '[basins.other]\nw = { above = 175 }\n')


def test_a_wrapped_dihedral_basin_classifies_a_run_that_jitters_across_the_seam():
    import numpy as np

    from basinmark.core.classify import classify_run
    from basinmark.core.geometry import dihedral
    from basinmark.core.model import Trajectory

    def frame(phi_deg):
        phi = np.radians(phi_deg)
        return np.array([[1.0, 0, 0], [0, 0, 0], [0, 0, 1.5], [np.cos(phi), np.sin(phi), 1.5]])

    times = np.arange(-10, 11) * 1.0
    angles = [0.0 + 2 * (k % 2) for k in range(10)] + [90.0] + [179.0 if k % 2 else -179.0 for k in range(10)]
    traj = Trajectory("t", [6, 6, 6, 6], np.stack([frame(a) for a in angles]), times)
    assert abs(abs(float(dihedral(traj.positions[-1], 0, 1, 2, 3))) - 179.0) < 0.01
    res = classify_run(traj, parse_rules(WRAP))
    assert res.backward_basin == "cis" and res.forward_basin == "trans" and res.outcome == "trans"
