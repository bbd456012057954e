"""Text is shown as it is: control characters, terminal escapes and direction overrides are refused at
entry (reasons, labeler names) and escaped in every table when an older file holds some; names of
automatic sources are refused for people."""

from __future__ import annotations

import sys
import unicodedata

import pandas as pd
import pytest
from hypothesis import given
from hypothesis import strategies as st

import basinmark.core.journal as journal_mod
from basinmark.cli import main
from basinmark.core.journal import LabelJournal
from basinmark.core.journal_io import LabelImportError, import_labels
from basinmark.core.labels import LabelError, all_labels
from basinmark.core.review import render_markdown, compare_labels
from basinmark.core.text import (BIDI_CONTROLS, TextError, check_labeler, check_plain_text, is_hidden,
                                 printable)
from basinmark.gui.label_table import build_label_table
from test_faults import JOURNAL, build_set, labels

ALLOWED = all_labels(["alpha", "beta"])
BAD = ["two\nlines", "cr\rhere", "tab\there", "\x1b[31mred\x1b[0m", "nul\x00", "del\x7f", "nel\x85", "csi\x9b2J",
       "exe\u202etxt.", "iso\u2066x\u2069", "line\u2028sep", "para\u2029sep", "alm\u061c", "rlm\u200f"]


# --- the character classes, against the Unicode Character Database as Python ships it ---------------

def test_hidden_characters_are_the_unicode_classes():
    every = [chr(i) for i in range(0x3000)]
    # general category Cc is exactly C0, DEL and C1 (Unicode 15, chapter 23.1); all of them are hidden
    assert {c for c in every if unicodedata.category(c) == "Cc"} == {chr(i) for i in [*range(0x20), 0x7F,
                                                                                      *range(0x80, 0xA0)]}
    assert all(is_hidden(c) for c in every if unicodedata.category(c) in ("Cc", "Zl", "Zp"))
    # the explicit directional formatting characters (bidi classes LRE ... PDI, UAX #9) are all hidden
    explicit = {"LRE", "RLE", "PDF", "LRO", "RLO", "LRI", "RLI", "FSI", "PDI"}
    assert {c for c in every if unicodedata.bidirectional(c) in explicit} <= BIDI_CONTROLS
    # ordinary text of many scripts is not
    assert not any(is_hidden(c) for c in "bêta ✓ 反応 — ÅÄÖ ñ 1.5 Å  ǅ")


@pytest.mark.parametrize("bad", BAD)
def test_free_text_with_hidden_characters_is_refused_naming_the_character(bad):
    with pytest.raises(TextError) as err:
        check_plain_text(bad, "reason")
    c = next(ch for ch in bad if is_hidden(ch))
    assert f"U+{ord(c):04X}" in str(err.value) and "one line of plain text" in str(err.value)
    assert not any(is_hidden(ch) for ch in str(err.value))  # the message itself shows the text escaped
    assert check_plain_text("ring opens late — twice, ✓", "reason") == "ring opens late — twice, ✓"


@given(st.text())
def test_printable_shows_nothing_hidden_and_leaves_plain_text_alone(text):
    shown = printable(text)
    assert not any(is_hidden(c) for c in shown)
    if not any(is_hidden(c) for c in text):
        assert shown == text
    assert "\n" not in shown and "\x1b" not in shown


def test_printable_ascii_shortcut_agrees_with_the_character_rules():
    """The quick path for printable ASCII leaves alone exactly the ASCII characters is_hidden lets through (the
    C0 controls and DEL are Unicode category Cc, from the Unicode Character Database via unicodedata)."""
    for code in range(128):
        ch = chr(code)
        assert (printable(ch) == ch) == (not is_hidden(ch)), repr(ch)
        assert (printable("ab" + ch + "cd") == "ab" + ch + "cd") == (not is_hidden(ch)), repr(ch)


def test_printable_escapes():
    assert printable("a\nb\tc\x1b[0m\u202ed") == "a\\nb\\tc\\x1b[0m\\u202ed"
    assert printable(None) == "" and printable(3) == "3"


@pytest.mark.parametrize("name", ["auto", "AUTO", " Auto ", "automatic", "rule", "rule:ab12", "RULE:x", "hand",
                                  "Final"])
def test_reserved_labeler_names_are_refused_for_people(name):
    with pytest.raises(TextError, match="reserved"):
        check_labeler(name)
    assert check_labeler("rule:ab12", person=False) == "rule:ab12"
    assert check_labeler("  ines ") == "ines" and check_labeler("autumn") == "autumn"


# --- at entry: the journal (API, command line and window all go through it) ---------------------------

def test_journal_refuses_hidden_characters_and_reserved_names(tmp_path):
    with LabelJournal.open(tmp_path / "j.jsonl", labeler="mira", allowed=ALLOWED) as j:
        h = "ab" * 32
        for bad in BAD:
            with pytest.raises(LabelError):
                j.record("r1", "alpha", content_hash=h, reason=bad)
            with pytest.raises(LabelError):
                j.record("r1", "alpha", content_hash=h, labeler=bad)
        for name in ("auto", "Rule:1234", "hand"):
            with pytest.raises(LabelError, match="reserved"):
                j.record("r1", "alpha", content_hash=h, labeler=name)
            with pytest.raises(LabelError, match="reserved"):
                j.record_batch([{"run_id": "r1", "label": "beta", "content_hash": h}], source="import",
                               labeler=name)
        with pytest.raises(LabelError):
            j.undo("r1", reason="x\ny")
        with pytest.raises(LabelError):
            j.review_complete(reviewer="auto")
        assert j.last_seq == 0  # only the header was written
        # automatic labels keep their rule:<hash> name
        ev = j.record_batch([{"run_id": "r1", "label": "alpha", "content_hash": h}], source="rule",
                            rules_hash="0123456789abcdef")[0]
        assert ev["labeler"] == "rule:0123456789ab"
        assert j.record("r1", "beta", content_hash=h, reason="looked twice", labeler="ines")["labeler"] == "ines"


def test_import_lists_rows_with_hidden_characters_or_reserved_names(tmp_path):
    runs = {"r0": "0" * 64, "r1": "1" * 64, "r2": "2" * 64}
    p = tmp_path / "in.csv"
    p.write_text('run,label,labeler,reason\nr0,alpha,ines,"two\nlines"\nr1,beta,rule:abc,\nr2,beta,ana\x1b[1m,\n',
                 encoding="utf-8")
    with LabelJournal.open(tmp_path / "j.jsonl", labeler="mira", allowed=ALLOWED) as j:
        with pytest.raises(LabelImportError) as err:
            import_labels(j, p, runs=runs, allowed=ALLOWED)
        assert j.last_seq == 0
    text = str(err.value)
    assert f"{p}, line 3: the reason" in text and "U+000A" in text  # a quoted cell spanning lines 2-3
    assert f"{p}, line 4: the labeler name 'rule:abc' is reserved" in text
    assert f"{p}, line 5: the labeler name" in text and "U+001B" in text


# --- on the command line -------------------------------------------------------------------------------

@pytest.fixture(scope="module")
def tset(tmp_path_factory):
    return build_set(tmp_path_factory.mktemp("text") / "twinpath")


def test_cli_refuses_before_any_work(tset, capsys):
    jp = tset / JOURNAL
    before = jp.read_bytes()
    for argv in (["label", tset, "t02", "alpha", "--reason", "fine\x1b[2J"],
                 ["label", tset, "t02", "alpha", "--as", "auto"],
                 ["label", tset, "t02", "alpha", "--as", "rule:1f2e"],
                 ["label", tset, "t02", "alpha", "--reason", "ok\u202eevil"],
                 ["undo", tset, "t01", "--reason", "a\nb"]):
        code = main([str(a) for a in argv])
        out, err = capsys.readouterr()
        assert code == 2 and err.startswith("basinmark: error: ") and "Traceback" not in err, err
        assert "\x1b" not in err and "\u202e" not in err
    assert jp.read_bytes() == before


def _old_event(tset, monkeypatch, run, reason, labeler):
    """An event as an older version (which did not check text) could have written it."""
    monkeypatch.setattr(journal_mod, "check_reason", lambda r: r)
    monkeypatch.setattr(journal_mod, "check_labeler_name", lambda n, person=True: n)
    with LabelJournal.open(tset / JOURNAL) as j:
        j.record(run, "beta", content_hash=j._replay.stacks[run][-1]["content_hash"], reason=reason,
                 labeler=labeler)
    monkeypatch.undo()


def test_tables_escape_what_older_files_hold(tset, monkeypatch, capsys):
    fake = "ok\nt03  alpha  beta  ines  99  2026-01-01T00:00:00.000Z  forged row"
    _old_event(tset, monkeypatch, "t03", fake, "eve\x1b[8m\u202e")
    code = main(["history", str(tset), "t03"])
    out, err = capsys.readouterr()
    assert code == 0
    lines = out.rstrip("\n").split("\n")
    n_events = 2  # the automatic label and the one above
    assert len(lines) == 2 + n_events, out  # header, rule, one row per event: the newline did not fake a row
    assert "ok\\nt03" in out and "eve\\x1b[8m\\u202e" in out and "\x1b" not in out and "\u202e" not in out
    # the label table of the window, the review report and the export-labels table show it escaped too
    row = build_label_table(["t03"], None, LabelJournal.open(tset / JOURNAL, readonly=True).state())
    assert row.loc[0, "reason"].startswith("ok\\nt03") and row.loc[0, "labeler"] == "eve\\x1b[8m\\u202e"
    with LabelJournal.open(tset / JOURNAL, readonly=True) as j:
        review = compare_labels(j.labels("hand"), j.labels("auto"), name_a="hand", name_b="auto")
    md = render_markdown(review)
    assert "eve\\x1b[8m\\u202e" in md and "\x1b" not in md and "ok\\nt03" in md
    code = main(["export-labels", str(tset), "--no-data"])
    out, err = capsys.readouterr()
    assert code == 0 and "\x1b" not in out and sum("t03" in ln for ln in out.splitlines()) == 1
