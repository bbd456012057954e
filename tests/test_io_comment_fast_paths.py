"""Comment lines on the regular (column) path give what reading each line alone gives: a list value written over
several tokens, with and without a doubled space somewhere; a constant key remembered across files."""

from __future__ import annotations

import numpy as np

from basinmark.core.io import comment_keys
from basinmark.core.io.comment_keys import Comments, _general, parse_comments


def _line_by_line(lines: list[bytes]) -> Comments:
    out = Comments(len(lines))
    _general([ln.strip().decode() for ln in lines], out)
    return out


def _same(a: Comments, b: Comments) -> None:
    assert a.info.keys() == b.info.keys() and a.vectors.keys() == b.vectors.keys() and a.text.keys() == b.text.keys()
    for k in a.info:
        np.testing.assert_array_equal(a.info[k], b.info[k])
    for k in a.vectors:
        np.testing.assert_array_equal(a.vectors[k], b.vectors[k])
    for k in a.text:
        assert list(a.text[k]) == list(b.text[k])


def test_a_list_over_several_tokens_reads_as_line_by_line(monkeypatch):
    lines = [f"time={t:.1f} dip=[{t:.1f}, 0.5, -1.0] tag=run".encode() for t in range(6)]
    regular = []
    real = comment_keys._regular
    monkeypatch.setattr(comment_keys, "_regular", lambda ls, out: regular.append(real(ls, out)) or regular[-1])
    got = parse_comments(lines)
    assert regular == [True]  # the column path took it
    _same(got, _line_by_line(lines))
    np.testing.assert_array_equal(got.vectors["dip"][:, 0], np.arange(6.0))
    # a doubled space on one line: joining the tokens again would not give that line's text back, so the lines
    # are read one by one, with the same result
    lines[3] = lines[3].replace(b", 0.5", b",  0.5")
    regular.clear()
    got = parse_comments(lines)
    assert regular == [False]
    _same(got, _line_by_line(lines))


def test_a_constant_text_is_read_once_and_stays_the_same_for_the_next_file():
    lines = [f"Properties=species:S:1:pos:R:3 time={t}.0 mode=quench".encode() for t in range(4)]
    first = parse_comments(lines)
    again = parse_comments([ln.replace(b"time=", b"time=1") for ln in lines])
    for got in (first, again):
        assert list(got.properties) == ["species:S:1:pos:R:3"] * 4
        assert list(got.text["mode"]) == ["quench"] * 4
    np.testing.assert_array_equal(again.info["time"], [10.0, 11.0, 12.0, 13.0])
