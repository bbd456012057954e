"""Saving edited rules keeps the chemist's text: comments, order and layout stay, only changed values move.

The reference reader is Python's own :mod:`tomllib` (TOML 1.0, not written here): the saved text must parse to
the original document with exactly the edited value changed."""

from __future__ import annotations

import tomllib

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from basinmark.core.rules import load_rules, parse_rules
from basinmark.core.rules_keep import keep_text, round_as_shown

COMMENTED = """\
# Rules for the fork of the toy rearrangement (our own invented scenario).
# Written by hand; keep these notes.
name = "forkdemo"      # shown in reports
reactant = "start"

dwell_fs = 15   # long enough to ignore one bond stretch

[monitors]
# the two bonds that can form
d_one = [1, 2]
d_two   = [1, 3]     # spaced on purpose
twist = [1, 2, 3, 4]

# --- basins -----------------------------------------------------------------
[basins.start]
d_one = { above = 2.6 }   # both bonds long
d_two = { above = 2.6 }

[basins.one]
d_one = { below = 1.75 }
d_two = { above = 2.3 }   # the other bond stays open
twist = { between = [ -60.0, 60.0 ] }

[basins.two]
d_two = { below = 1.75 }
d_one = { above = 2.3 }

[flags]
late_commit_fs = 150.0
# max_energy_drift = 2.0   (left at the default on purpose)
energy_unit = "kcal/mol"
"""


def _comments(text: str) -> list[str]:
    return [line for line in text.splitlines() if "#" in line]


def test_save_after_a_threshold_edit_keeps_every_comment(tmp_path):
    path = tmp_path / "basins.toml"
    path.write_text(COMMENTED, encoding="utf-8")
    rules = load_rules(path)
    edited = rules.with_threshold("one", "d_one", "below", 1.8)
    saved = edited.save(path)
    text = path.read_text(encoding="utf-8")
    # every comment line of the original is still there, in order (lines with a changed value excepted: none here)
    assert _comments(text) == _comments(COMMENTED)
    # exactly one line changed, and it is the edited one
    diff = [(a, b) for a, b in zip(COMMENTED.splitlines(), text.splitlines()) if a != b]
    assert diff == [("d_one = { below = 1.75 }", "d_one = { below = 1.8 }")]
    assert len(text.splitlines()) == len(COMMENTED.splitlines())
    assert saved == edited and not saved.warnings
    # reference reader: same document but for the edited value
    want = tomllib.loads(COMMENTED)
    want["basins"]["one"]["d_one"]["below"] = 1.8
    assert tomllib.loads(text) == want


def test_between_bound_edit_keeps_array_spacing(tmp_path):
    path = tmp_path / "basins.toml"
    path.write_text(COMMENTED, encoding="utf-8")
    edited = load_rules(path).with_threshold("one", "twist", "above", -45.5)
    edited.save(path)
    text = path.read_text(encoding="utf-8")
    assert "twist = { between = [ -45.5, 60.0 ] }" in text
    assert _comments(text) == _comments(COMMENTED)


def test_save_as_elsewhere_takes_the_original_text(tmp_path):
    src = tmp_path / "basins.toml"
    src.write_text(COMMENTED, encoding="utf-8")
    out = tmp_path / "copy.toml"
    edited = load_rules(src).with_threshold("two", "d_one", "above", 2.41)
    saved = edited.save(out, template=src)
    assert _comments(out.read_text(encoding="utf-8")) == _comments(COMMENTED)
    assert saved == edited
    assert src.read_text(encoding="utf-8") == COMMENTED  # the original is untouched


def test_defaults_are_not_written_and_removed_keys_go(tmp_path):
    path = tmp_path / "basins.toml"
    path.write_text(COMMENTED, encoding="utf-8")
    rules = load_rules(path)
    edited = rules.with_threshold("start", "d_one", "above", 2.7)
    edited.save(path)
    text = path.read_text(encoding="utf-8")
    # the reader's defaults (max_energy_drift, reactant spelled out, etc.) were not added as new lines
    assert "\nmax_energy_drift" not in text and "allow_overlap" not in text
    assert load_rules(path) == edited


def test_rules_that_no_longer_fit_are_written_afresh_and_said_so(tmp_path):
    path = tmp_path / "basins.toml"
    path.write_text(COMMENTED, encoding="utf-8")
    rules = load_rules(path)
    # basin order sets the track indices; a reorder cannot be written into the old layout
    reordered = type(rules)(**{**rules.__dict__, "basins": dict(reversed(list(rules.basins.items())))})
    text, why = keep_text(COMMENTED, reordered)
    assert why and "afresh" in why
    assert parse_rules(text) == reordered
    saved = reordered.save(path)
    assert saved == reordered and any("afresh" in w for w in saved.warnings)


@settings(max_examples=40, deadline=None)
@given(st.floats(min_value=1.0, max_value=2.25, allow_nan=False))
def test_any_dragged_value_round_trips(value):
    rules = parse_rules(COMMENTED)
    v = round_as_shown(value, "distance")
    edited = rules.with_threshold("one", "d_one", "below", v)
    text, why = keep_text(COMMENTED, edited)
    assert why == ""
    assert parse_rules(text) == edited
    assert _comments(text) == _comments(COMMENTED)
    assert tomllib.loads(text)["basins"]["one"]["d_one"]["below"] == v


@pytest.mark.parametrize("kind, value, want", [("distance", 3.00958, 3.01), ("angle", 104.4449, 104.4),
                                               ("dihedral", -59.96, -60.0)])
def test_dragged_values_are_rounded_as_shown(kind, value, want):
    assert round_as_shown(value, kind) == want
