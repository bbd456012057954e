"""Comment lines read to the letter of the extended-XYZ conventions.

References: the format's own reference parser (the ``extxyz`` package,
``extxyz.core.read_comment_line``) and ``ase.io.read``; a value is checked
wherever those two agree with each other (they differ on a few corners, e.g.
escapes and quoted lists, where neither is taken as the truth).
"""

from __future__ import annotations

import io
import warnings

import ase.io
import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from basinmark.core.errors import PartialReadWarning, TrajectoryFileError
from basinmark.core.io.comment_keys import as_text
from basinmark.core.io.comment_line import parse_line
from basinmark.core.io.xyz import parse_xyz

extxyz_core = pytest.importorskip("extxyz.core")


def reference_extxyz(line: str) -> dict | None:
    try:
        return extxyz_core.read_comment_line(line)
    except Exception:  # the reference parser rejects the line
        return None


def reference_ase(line: str) -> dict | None:
    text = f"1\n{line}\nH 0.0 0.0 0.0\n"
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            atoms = ase.io.read(io.StringIO(text), format="extxyz")
    except Exception:
        return None
    info = dict(atoms.info)
    if "pbc" in line:
        info["pbc"] = atoms.pbc
    return info


def kind(value) -> str:
    if isinstance(value, (bool, np.bool_)):
        return "bool"
    if isinstance(value, (int, float, np.integer, np.floating)):
        return "number"
    if isinstance(value, str):
        return "str"
    arr = np.asarray(value)
    return {"b": "bools", "i": "numbers", "u": "numbers", "f": "numbers"}.get(arr.dtype.kind, "strs") + f"{arr.shape}"


def same(a, b) -> bool:
    if kind(a) != kind(b):
        return False
    if kind(a) in ("bool", "number", "str"):
        return a == b
    return np.array_equal(np.asarray(a), np.asarray(b))


def block_value(block, key):
    """What the reader kept for a key, as one frame's value."""
    if key in block.info:
        return ("number", block.info[key][0])
    if key in block.vectors:
        return ("numbers", block.vectors[key][0])
    if key in block.text_info:
        return ("text", block.text_info[key][0])
    return None


def expected_storage(value):
    k = kind(value)
    if k == "number":
        return ("number", float(value))
    if k.startswith("numbers"):
        return ("numbers", np.asarray(value, dtype=float))
    return ("text", as_text(np.asarray(value) if k.startswith(("bools", "strs")) else value))


def stored_equal(got, want) -> bool:
    if got is None or got[0] != want[0]:
        return False
    if want[0] == "numbers":
        return np.array_equal(got[1], want[1])
    return got[1] == want[1]


# ------------------------------------------------------------------------------------------
# value kinds

KEY = st.text(alphabet="abcgkmqwxyz_", min_size=1, max_size=6).map(lambda s: "k" + s)
INT = st.integers(-10**9, 10**9).map(str)
FLOAT = st.floats(allow_nan=False, allow_infinity=False, width=64).map(repr)
FORTRAN = st.floats(-1e6, 1e6, allow_nan=False).map(lambda x: f"{x:.9e}".replace("e", st_choice_exp(x)))
BOOL = st.sampled_from(["T", "F", "True", "False", "true", "false", "TRUE", "FALSE"])
BARE = st.text(alphabet="abcxyz_./:-+@", min_size=2, max_size=8).filter(
    lambda s: s[0] not in "+-." and not s.lower().startswith(("nan", "inf")))
QUOTED_TEXT = st.text(alphabet=st.characters(min_codepoint=32, max_codepoint=126), max_size=12)
SEP = st.sampled_from([", ", ",", " ", "  ", " , "])


def st_choice_exp(x: float) -> str:
    return "d" if int(abs(x) * 1000) % 2 else "D"


def quote(text: str) -> str:
    return '"' + text.replace("\\", "\\\\").replace('"', '\\"') + '"'


@st.composite
def values(draw):
    how = draw(st.sampled_from(["int", "float", "fortran", "bool", "bare", "quoted", "quoted_number",
                                "brace", "list", "list2", "quoted_list"]))
    if how == "int":
        return draw(INT)
    if how == "float":
        return draw(FLOAT)
    if how == "fortran":
        return draw(FORTRAN)
    if how == "bool":
        return draw(BOOL)
    if how == "bare":
        return draw(BARE)
    if how == "quoted":
        return quote(draw(QUOTED_TEXT))
    if how == "quoted_number":
        return '"' + draw(st.sampled_from(["", " ", "  "])) + draw(st.one_of(INT, FLOAT, FORTRAN)) + '"'
    if how == "brace":
        items = draw(st.lists(st.one_of(INT, FLOAT), min_size=1, max_size=4))
        return "{" + " ".join(items) + "}"
    element = draw(st.sampled_from([INT, FLOAT, BOOL, BARE, QUOTED_TEXT.map(quote)]))
    sep = draw(SEP)
    if how == "list":
        return "[" + sep.join(draw(st.lists(element, min_size=1, max_size=5))) + "]"
    if how == "list2":
        n_rows, n_cols = draw(st.integers(1, 3)), draw(st.integers(1, 3))
        rows = ["[" + sep.join(draw(st.lists(element, min_size=n_cols, max_size=n_cols))) + "]"
                for _ in range(n_rows)]
        return "[" + ", ".join(rows) + "]"
    return '"' + " ".join(draw(st.lists(st.one_of(INT, FLOAT), min_size=2, max_size=4))) + '"'


@st.composite
def comment_lines(draw):
    keys = draw(st.lists(KEY, min_size=1, max_size=5, unique=True))
    pairs = {k: draw(values()) for k in keys}
    if draw(st.booleans()):
        pairs["pbc"] = draw(st.sampled_from(["[T, T, T]", '"T T F"', "[F, F, F]"]))
    return " ".join(f"{k}={v}" for k, v in pairs.items())


@settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(comment_lines())
def test_values_agree_with_the_reference_parsers_where_they_agree(line):
    pairs, bad = parse_line(line)
    ours = {p.key: p.value for p in pairs}
    ref_x, ref_a = reference_extxyz(line), reference_ase(line)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        block = parse_xyz(f"1\n{line}\nH 0.0 0.0 0.0\n".encode(), "case.xyz")
    if ref_x is None or ref_a is None:
        return  # no agreed reference for this line
    agreed = {k for k in ref_x if k in ref_a and same(ref_x[k], ref_a[k])}
    for key in agreed:
        assert key in ours, (line, key)
        assert same(ours[key], ref_x[key]), (line, key, ours[key], ref_x[key])
        if key != "pbc":
            assert stored_equal(block_value(block, key), expected_storage(ref_x[key])), (line, key)
    if set(ref_x) == set(ref_a) == agreed:
        assert not bad and set(ours) == agreed


# hand-picked lines on which both references agree, so that the checks above surely run on every kind
AGREED_LINES = [
    'pbc=[T, T, T] dipole=[0.1, 0.2, 0.3] time=17.0',
    'kq=[1, 2] ka="x  y" kb=T kd={1 2} kf=1.5',
    'kx=" 0.5d0" ky="1 2 3" kz=-2.5e-3 kw=FALSE',
    'km=[T, F, T] kn=[1.5, 2, 3] kl=[ab, c] kp=[[1, 2], [3, 4]]',
    'ke={0.5} "kq k"=1 ki=+3',
]


@pytest.mark.parametrize("line", AGREED_LINES)
def test_every_kind_of_value_on_lines_both_references_agree_on(line):
    ref_x, ref_a = reference_extxyz(line), reference_ase(line)
    assert ref_x is not None and ref_a is not None
    pairs, bad = parse_line(line)
    ours = {p.key: p.value for p in pairs}
    assert not bad
    checked = 0
    for key, value in ref_x.items():
        if key in ref_a and same(value, ref_a[key]):
            assert same(ours[key], value), (key, ours[key], value)
            checked += 1
    assert checked >= 2


def test_lists_written_with_spaces_are_whole_values_not_keys():
    data = b"1\npbc=[T, T, T] dipole=[0.1, 0.2, 0.3] time=2.0\nH 0 0 0\n" * 3
    block = parse_xyz(data, "a.xyz")
    assert "T," not in block.text_info and "T]" not in block.text_info
    np.testing.assert_array_equal(block.vectors["dipole"], [[0.1, 0.2, 0.3]] * 3)
    np.testing.assert_array_equal(block.info["time"], [2.0] * 3)


def test_quoted_numbers_braces_and_spaces_inside_quotes():
    line = 'ka=" 0.5d0" kb={0.5} kc="x   y" kd="tab\\there, \\"quoted\\" \\\\ back"'
    block = parse_xyz(f"1\n{line}\nH 0 0 0\n".encode(), "a.xyz")
    assert block.info["ka"].tolist() == [0.5] and block.info["kb"].tolist() == [0.5]
    assert block.text_info["kc"] == ["x   y"]
    assert block.text_info["kd"] == ['tab\there, "quoted" \\ back']


@pytest.mark.parametrize("bad_token,why", [
    ('k\\"ey', None),             # a key with an escaped quote: readable
    ('"ke\\"y"=1', None),        # a quoted key with an escaped quote: readable
    ('s=["a b", c]', None),       # a quoted string inside a list: readable
    ("key=a=b", None),            # '=' inside a value: readable as text
    ("key=", "nothing after '='"),
    ('key="never closed', "never closed"),
    ("=7", "without a key"),
    ("m=[[1,2],[3]]", "different lengths"),
])
@pytest.mark.parametrize("fixed_width", [True, False])
def test_one_odd_token_keeps_every_other_key_and_warns_once(bad_token, why, fixed_width):
    frames = [f"3\ntime={t} {bad_token} epot=-1.{t} Properties=species:S:1:pos:R:3:charge:R:1\n"
              "C 0.0 0.0 0.0 0.1\nH 1.0 0.0 0.0 0.2\nH 0.0 1.0 0.0 0.3\n" for t in range(3)]
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        block = parse_xyz("".join(frames).encode(), "odd.xyz", fixed_width=fixed_width)
    np.testing.assert_array_equal(block.info["time"], [0, 1, 2])
    np.testing.assert_array_equal(block.info["epot"], [-1.0, -1.1, -1.2])
    np.testing.assert_array_equal(block.arrays["charge"][:, 2], [0.3] * 3)
    mine = [w for w in caught if issubclass(w.category, PartialReadWarning)]
    if why is None:
        assert mine == [] and block.warnings == []
        return
    assert len(mine) == 1 and len(block.warnings) == 1
    text = block.warnings[0]
    assert "odd.xyz" in text and "line 2" in text and bad_token.split(" ")[0] in text and why in text
    assert "2 more lines" in text


def test_escaped_quote_key_and_quoted_list_values():
    line = 'k\\"ey=1 "a b"=2 s=["a b", c] key=a=b'
    pairs, bad = parse_line(line)
    assert not bad
    got = {p.key: p.value for p in pairs}
    assert got['k"ey'] == 1 and got["a b"] == 2 and got["key"] == "a=b"
    assert got["s"].tolist() == ["a b", "c"]


def test_two_dimensional_lists():
    pairs, bad = parse_line("m=[[1, 2, 3], [4, 5, 6]] n=[[T, F], [F, T]]")
    assert not bad
    m, n = pairs[0].value, pairs[1].value
    assert m.shape == (2, 3) and m.dtype.kind == "i" and m[1, 2] == 6
    assert n.dtype == bool and n.tolist() == [[True, False], [False, True]]


# ------------------------------------------------------------------------------------------
# typed per-atom columns

@pytest.mark.parametrize("fixed_width", [True, False])
@pytest.mark.parametrize("props,atom2,words", [
    ("Z:I:1:pos:R:3", "1.9 1.000 0.000 0.000", ["line 4", "'Z'", "'1.9'", "whole number"]),
    ("species:S:1:pos:R:3:n:I:1", "H 1.000 0.000 0.000 2e1", ["line 4", "'n'", "'2e1'", "whole number"]),
    ("species:S:1:pos:R:3:ok:L:1", "H 1.000 0.000 0.000 maybe", ["line 4", "'ok'", "'maybe'", "logical"]),
    ("species:S:1:pos:R:3:q:R:1", "H 1.000 0.000 0.000 lots", ["line 4", "'q'", "'lots'", "not a number"]),
])
def test_typed_columns_are_checked_with_the_line(props, atom2, words, fixed_width):
    tail = {"I": " 1", "L": " T", "R": " 0.5"}
    first = "1 0.000 0.000 0.000" if props.startswith("Z") else "H 0.000 0.000 0.000" + tail[props.split(":")[-2]]
    data = f"2\nProperties={props}\n{first}\n{atom2}\n".encode()
    with pytest.raises(TrajectoryFileError) as err:
        parse_xyz(data, "typed.xyz", fixed_width=fixed_width)
    for w in words:
        assert w in str(err.value)


def test_integer_and_logical_columns_that_are_right_read_as_such():
    data = b"2\nProperties=Z:I:1:pos:R:3:ok:L:1:n:I:1\n1 0.0 0.0 0.0 T -3\n8 1.0 0.0 0.0 F +4\n"
    block = parse_xyz(data, "typed.xyz")
    assert block.numbers.tolist() == [1, 8]
    assert block.arrays["ok"].tolist() == [[True, False]]
    assert block.arrays["n"].tolist() == [[-3, 4]]
