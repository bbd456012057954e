"""Comment lines read as columns over all frames at once agree with reading them one line at a time.

The fast path (``comment_keys._regular``) splits every frame's comment line into tokens once and converts
all numeric values of all frames in one float() pass; the line-by-line path (``_general``, built on the
one-line parser checked against two reference parsers in test_io_comment_line.py) is the yardstick.
Numbers are also compared with Python's own float() of their text.
"""

from __future__ import annotations

import math

import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st

from basinmark.core.io.comment_keys import Comments, _general, parse_comments

KEYS = st.sampled_from(["time", "epot", "ekin", "e", "step", "tag", "T_K", "energy", "dt"])


def _number_text(x: float, style: int) -> str:
    return [repr(x), f"{x:.5f}", f"{x:.3e}", f"{x:g}", f"{x:.2f}".replace("0.", ".", 1)][style]


numbers = st.builds(_number_text, st.floats(-1e6, 1e6, allow_nan=False, allow_infinity=False),
                    st.integers(0, 4))
values = st.one_of(
    numbers,
    st.integers(-10**6, 10**6).map(str),
    st.sampled_from(["T", "F", "nan", "inf", "-inf", "1.5d-3", "abc", "species:S:1:pos:R:3", "x=1", "time=3",
                     "1e", "--1", "+.5", "1.", "1_000"]),
)


@st.composite
def regular_blocks(draw):
    keys = draw(st.lists(KEYS, min_size=1, max_size=5, unique=True))
    n = draw(st.integers(1, 30))
    # per key: mostly numbers of one style (as programs write them), sometimes anything
    lines = []
    kinds = {k: draw(st.sampled_from(["num", "num", "num", "any", "same"])) for k in keys}
    same = {k: draw(values) for k in keys}
    for _ in range(n):
        parts = []
        for k in keys:
            v = same[k] if kinds[k] == "same" else draw(numbers if kinds[k] == "num" else values)
            parts.append(f"{k}={v}")
        lines.append(" ".join(parts).encode())
    return lines


def _equal(a: np.ndarray, b: np.ndarray) -> bool:
    return a.shape == b.shape and bool(np.all((a == b) | (np.isnan(a) & np.isnan(b))))


@settings(max_examples=300, deadline=None)
@given(regular_blocks())
def test_columns_at_once_agree_with_line_by_line(lines):
    fast = parse_comments(lines)
    slow = Comments(len(lines))
    _general([ln.decode() for ln in lines], slow)
    assert fast.info.keys() == slow.info.keys()
    for k in fast.info:
        assert _equal(fast.info[k], slow.info[k]), k
    assert fast.text.keys() == slow.text.keys()
    for k in fast.text:
        assert list(fast.text[k]) == list(slow.text[k]), k
    assert fast.flags == slow.flags and fast.dropped == slow.dropped
    assert [b.text for _, b in fast.bad] == [b.text for _, b in slow.bad]


@settings(max_examples=200, deadline=None)
@given(st.lists(st.tuples(st.floats(allow_nan=False, allow_infinity=False), st.integers(0, 4)), min_size=1,
                max_size=50))
def test_numbers_are_those_of_float(xs):
    texts = [_number_text(x, s) for x, s in xs]
    lines = [f"time={t} epot={t}".encode() for t in texts]
    out = parse_comments(lines)
    expected = np.array([float(t) for t in texts])  # Python's own correctly rounded conversion
    assert np.array_equal(out.info["time"], expected) and np.array_equal(out.info["epot"], expected)
    assert all(math.copysign(1, a) == math.copysign(1, b) for a, b in zip(out.info["time"], expected))
