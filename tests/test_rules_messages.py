"""Rules that say what they mean: a stated default dwell, unknown keys as errors with line and suggestion,
basin names checked as labels when the file loads."""

from __future__ import annotations

from pathlib import Path

import pytest
import scipy.constants as sc

from basinmark.core.labels import FIXED_LABELS, check_label_text
from basinmark.core.rules import DEFAULT_DWELL_FS, RulesError, load_rules, parse_rules

from rules_examples import SCHEMA_EXAMPLE

GOOD = SCHEMA_EXAMPLE


def _line_of(text: str, fragment: str) -> int:
    return next(no for no, line in enumerate(text.splitlines(), 1) if fragment in line)


def _load_err(tmp_path: Path, text: str) -> RulesError:
    p = tmp_path / "basins.toml"
    p.write_text(text, encoding="utf-8")
    with pytest.raises(RulesError) as ei:
        load_rules(p)
    return ei.value


@pytest.mark.parametrize("old, new, typo, suggestion", [
    ("dwell_fs = 20.0", "dwel_fs = 20.0", "dwel_fs", "dwell_fs"),
    ("late_commit_fs = 150.0", "late_comit_fs = 150.0", "late_comit_fs", "late_commit_fs"),
    ("[flags]", "[flag]", "flag", "flags"),
    ("concerted_fs = 60.0", "concerted = 60.0", "concerted", "concerted_fs"),
    ("r_b = { below = 1.75 }", "r_b = { belw = 1.75 }", "belw", "below"),
    ("r_b = { below = 1.75 }", "r_bb = { below = 1.75 }", "r_bb", "r_b"),
    ('reactant = "reactant"', 'reactant = "reactnt"', "reactnt", "reactant"),
])
def test_typos_are_errors_with_line_and_suggestion(tmp_path, old, new, typo, suggestion):
    assert old in GOOD
    text = GOOD.replace(old, new, 1)
    e = _load_err(tmp_path, text)
    msg = str(e)
    assert str(tmp_path / "basins.toml") in msg  # the file
    assert e.line == _line_of(text, new) and f"line {e.line}" in msg  # the line
    assert typo in msg and f"did you mean {suggestion}?" in msg


def test_unknown_key_without_a_near_name_lists_the_valid_ones():
    with pytest.raises(RulesError) as ei:
        parse_rules("colour = 'teal'\n" + GOOD)
    e = ei.value
    assert e.line == 1 and "colour" in e.problem and "did you mean" not in e.problem
    assert "dwell_fs" in e.problem and "reactant" in e.problem  # what may be written there


def test_stated_default_dwell():
    r = parse_rules(GOOD.replace("dwell_fs = 20.0\n", ""))
    assert r.dwell_fs == DEFAULT_DWELL_FS
    assert any("dwell_fs" in w and "default" in w for w in r.warnings)  # said, not silent
    # the reason stated in the code and docs: it outlasts two periods of a C-H stretch, the fastest
    # vibration of an organic molecule, so a bond jittering about a threshold does not commit.
    # ~3000 cm^-1 for a C-H stretch is from memory; the period 1/(c * wavenumber) with CODATA c (scipy)
    period_fs = 1.0 / (sc.c * 100.0 * 3000.0) / sc.femto
    assert period_fs == pytest.approx(11.1, abs=0.05)
    assert 1.5 * period_fs < DEFAULT_DWELL_FS < 3 * period_fs
    # written out when saved, so a saved file never depends on the default
    assert "dwell_fs = 20.0" in r.to_toml()


BAD_NAMES = {
    "empty": '""',
    "newline": '"alpha\\nbeta"',
    "tab": '"al\\tpha"',
    "too long": '"' + "x" * 65 + '"',
    "edge space": '" alpha"',
    "Recrossing": '"Recrossing"',
    "UNFINISHED": '"UNFINISHED"',
    "Excluded": '"Excluded"',
    "ambiguous": '"ambiguous"',
}


@pytest.mark.parametrize("case", list(BAD_NAMES))
def test_bad_basin_names_are_rejected_at_load(tmp_path, case):
    text = GOOD.replace("[basins.beta]", f"[basins.{BAD_NAMES[case]}]")
    e = _load_err(tmp_path, text)
    assert e.key is not None and e.key.startswith("basins")
    assert "label" in e.problem or "outcome" in e.problem


def test_fixed_label_clash_names_the_label():
    with pytest.raises(RulesError, match="recrossing"):
        parse_rules(GOOD.replace("[basins.beta]", "[basins.ReCrossing]"))


def test_basins_differing_only_in_case_are_refused():
    with pytest.raises(RulesError, match="only in case"):
        parse_rules(GOOD.replace("[basins.beta]", "[basins.Alpha]"))


def test_every_accepted_basin_name_is_a_valid_label():
    r = parse_rules(GOOD.replace("[basins.beta]", '[basins."β-lactone ring (6)"]'))
    for name in r.basin_names:
        assert check_label_text(name) == name
        assert name.casefold() not in {f.casefold() for f in FIXED_LABELS}
