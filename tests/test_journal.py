"""Label journal: hashes, events, replay, undo, batches, torn tails, the head file."""

from __future__ import annotations

import hashlib
import json
import os

import pandas as pd
import pytest

from basinmark.core.journal import JournalError, LabelJournal, verify_journal
from basinmark.core.journal_verify import verify_report
from basinmark.core.journal_format import canonical, event_hash, head_path, read_head
from basinmark.core.labels import FIXED_LABELS, LabelError, all_labels, validate_label

H1 = "11" * 32
H2 = "22" * 32
PRODUCTS = ["alpha", "beta"]


@pytest.fixture
def jpath(tmp_path):
    return tmp_path / "basinmark-labels.jsonl"


def open_j(path, **kw):
    kw.setdefault("labeler", "mira")
    kw.setdefault("set_id", "ringfork-demo")
    return LabelJournal.open(path, **kw)


# --- hashes -------------------------------------------------------------------------------
def test_sha256_fips_180_4_abc_vector():
    # FIPS 180-4 (and its example appendix): SHA-256("abc")
    assert hashlib.sha256(b"abc").hexdigest() == (
        "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad")


def test_event_hash_is_fixed_for_a_fixed_event():
    ev = {"seq": 3, "kind": "label", "time": "2026-01-02T03:04:05.678Z", "labeler": "mira", "source": "hand",
          "run": "run017", "content_hash": "ab" * 32, "label": "alpha", "replaces": None,
          "reason": "C9 bond forms late, ring opens", "prev": "cd" * 32, "hash": "ignored"}
    # canonical form as specified: sorted keys, no whitespace, ASCII, hash field left out
    expected = ('{"content_hash":"' + "ab" * 32 + '","kind":"label","label":"alpha","labeler":"mira",'
                '"prev":"' + "cd" * 32 + '","reason":"C9 bond forms late, ring opens","replaces":null,'
                '"run":"run017","seq":3,"source":"hand","time":"2026-01-02T03:04:05.678Z"}')
    assert canonical({k: v for k, v in ev.items() if k != "hash"}) == expected
    # digest fixed once by this implementation; any change of the serialisation breaks it
    assert event_hash(ev) == "3bf2c879f509cbcebcf0d7f1ce1f67128071235b5d3a45e1ee2259747d974637"
    assert event_hash(ev) == hashlib.sha256(expected.encode("ascii")).hexdigest()
    ev2 = dict(ev, reason="Ünïcode — ok")  # non-ASCII is escaped, so the digest does not depend on locale
    assert "\\u00dc" in canonical(ev2)
    assert event_hash(ev2) == "d025d027de97dd6b0d5854ee05594bed7cb120403bab474e37ba258ba3107b90"


# --- labels vocabulary ------------------------------------------------------------------------
def test_label_vocabulary():
    assert FIXED_LABELS == ("recrossing", "unfinished", "ambiguous", "excluded")
    assert all_labels(PRODUCTS) == ["alpha", "beta", "recrossing", "unfinished", "ambiguous", "excluded"]

    class R:
        products = ["gamma"]
    assert all_labels(R()) == ["gamma", *FIXED_LABELS]
    allowed = all_labels(PRODUCTS)
    assert validate_label(" beta ", allowed) == "beta"
    with pytest.raises(LabelError, match="allowed labels are: alpha, beta"):
        validate_label("delta", allowed)
    with pytest.raises(LabelError, match="needs a reason"):
        validate_label("excluded", allowed)
    assert validate_label("excluded", allowed, reason="drift 3 kcal/mol") == "excluded"
    for bad in ["", "  ", "a\nb", 3, "x" * 65]:
        with pytest.raises(LabelError):
            validate_label(bad)


# --- writing and replay -------------------------------------------------------------------------
def test_new_journal_has_header_and_chain(jpath):
    with open_j(jpath) as j:
        ev = j.record("r1", "alpha", content_hash=H1, reason="clear")
    lines = jpath.read_text().splitlines()
    header, first = json.loads(lines[0]), json.loads(lines[1])
    assert header["kind"] == "header" and header["seq"] == 0 and header["set_id"] == "ringfork-demo"
    assert header["created_by"] == "mira" and header["created_at"].endswith("Z") and header["schema"] == 1
    assert first == ev
    assert first["seq"] == 1 and first["prev"] == header["hash"] and first["hash"] == event_hash(first)
    assert first["time"].endswith("Z") and first["source"] == "hand" and first["replaces"] is None
    assert lines[1] == canonical(first)
    assert read_head(jpath) == (1, first["hash"])
    assert verify_journal(jpath) == []


def test_default_labeler_is_login_name(jpath, monkeypatch):
    monkeypatch.setattr("getpass.getuser", lambda: "tomas")
    with LabelJournal.open(jpath) as j:
        assert j.record("r1", "beta", content_hash=H1)["labeler"] == "tomas"
        assert j.record("r2", "beta", content_hash=H1, labeler="ines")["labeler"] == "ines"


def test_state_auto_hand_final_and_undo(jpath):
    with open_j(jpath, allowed=all_labels(PRODUCTS)) as j:
        evs = j.record_batch([{"run_id": "r1", "label": "alpha", "content_hash": H1},
                              {"run_id": "r2", "label": "recrossing", "content_hash": H1},
                              {"run_id": "r3", "label": "unfinished", "content_hash": H1}],
                             rules_hash="f0" * 32, tool_version="9.9")
        assert [e["source"] for e in evs] == ["rule"] * 3
        assert evs[0]["rules_hash"] == "f0" * 32 and evs[0]["tool_version"] == "9.9"
        assert evs[0]["labeler"].startswith("rule:")
        assert len({e["time"] for e in evs}) == 1
        hand = j.record("r1", "beta", content_hash=H1, reason="ring closes on C4")
        assert hand["replaces"] is None  # no earlier hand label
        again = j.record("r1", "ambiguous", content_hash=H1)
        assert again["replaces"] == "beta"
        j.record("r3", "excluded", content_hash=H1, reason="energy drift 2.3 kcal/mol")
        with pytest.raises(LabelError):
            j.record("r2", "excluded", content_hash=H1)
        with pytest.raises(LabelError):
            j.record("r2", "delta", content_hash=H1)
        st = j.state({"r1": H1, "r2": H2, "r3": H1}).set_index("run")
        assert list(j.state().columns) == ["run", "auto_label", "hand_label", "final_label", "labeler", "time",
                                           "reason", "events", "data_changed"]
        assert st.loc["r1", "auto_label"] == "alpha" and st.loc["r1", "final_label"] == "ambiguous"
        assert st.loc["r1", "events"] == 3 and st.loc["r1", "labeler"] == "mira"
        assert st.loc["r2", "final_label"] == "recrossing" and pd.isna(st.loc["r2", "hand_label"])
        assert bool(st.loc["r2", "data_changed"]) and not bool(st.loc["r1", "data_changed"])
        assert st.loc["r3", "final_label"] == "excluded" and "drift" in st.loc["r3", "reason"]
        u = j.undo("r1", reason="misclick")
        assert u["kind"] == "undo" and u["undoes"] == again["seq"]
        assert u["replaces"] == "ambiguous" and u["label"] == "beta"
        assert j.final_label("r1") == "beta"
        j.undo("r1")
        assert j.final_label("r1") == "alpha"  # back to the automatic label
        j.undo("r1")
        assert j.final_label("r1") is None
        with pytest.raises(JournalError, match="no label to undo"):
            j.undo("r1")
        hist = j.history("r1")
        assert list(hist["kind"]) == ["label", "label", "label", "undo", "undo", "undo"]
        assert list(hist["seq"]) == sorted(hist["seq"])
    # replay from disk gives the same state
    with open_j(jpath, readonly=True) as r:
        assert r.state().equals(j.state())
        assert r.final_label("r3") == "excluded"
    assert verify_journal(jpath) == []


def test_batch_is_checked_before_writing(jpath):
    with open_j(jpath, allowed=all_labels(PRODUCTS)) as j:
        size = jpath.stat().st_size
        with pytest.raises(LabelError, match="batch entry 2"):
            j.record_batch([{"run_id": "r1", "label": "alpha", "content_hash": H1},
                            {"run_id": "r2", "label": "nonsense", "content_hash": H1}])
        with pytest.raises(JournalError, match="lacks 'content_hash'"):
            j.record_batch([{"run_id": "r1", "label": "alpha"}])
        assert jpath.stat().st_size == size
        evs = j.record_batch([{"run_id": "r1", "label": "alpha", "content_hash": H1},
                              {"run_id": "r1", "label": "beta", "content_hash": H1}])
        assert evs[1]["replaces"] == "alpha"


def test_batch_is_one_write_and_one_fsync(jpath, monkeypatch):
    with open_j(jpath) as j:
        calls = {"write": 0, "fsync": 0}
        real_write, real_fsync = os.write, os.fsync

        def count_write(fd, data):
            calls["write"] += fd == j._fd
            return real_write(fd, data)

        def count_fsync(fd):
            calls["fsync"] += fd == j._fd
            return real_fsync(fd)
        monkeypatch.setattr(os, "write", count_write)
        monkeypatch.setattr(os, "fsync", count_fsync)
        j.record_batch([{"run_id": f"r{i}", "label": "alpha", "content_hash": H1} for i in range(500)])
        assert calls == {"write": 1, "fsync": 1}
        j.record("r1", "beta", content_hash=H1)
        assert calls == {"write": 2, "fsync": 2}


def test_readonly_never_writes_or_locks(jpath):
    with open_j(jpath) as j:
        j.record("r1", "alpha", content_hash=H1)
    before = jpath.read_bytes()
    with open_j(jpath, readonly=True) as r:
        assert r.readonly and r.lock_holder is None
        with pytest.raises(JournalError, match="read-only"):
            r.record("r1", "beta", content_hash=H1)
    assert jpath.read_bytes() == before
    with pytest.raises(JournalError, match="no label journal"):
        LabelJournal.open(jpath.with_name("none.jsonl"), readonly=True)


def test_reopen_continues_chain(jpath):
    with open_j(jpath) as j:
        j.record("r1", "alpha", content_hash=H1)
    with open_j(jpath, labeler="ines") as j:
        assert j.final_label("r1") == "alpha"
        ev = j.record("r1", "beta", content_hash=H1)
        assert ev["seq"] == 2 and ev["replaces"] == "alpha"
    assert len(jpath.read_text().splitlines()) == 3
    assert verify_journal(jpath) == []


def test_torn_tail_is_set_aside_not_dropped(jpath):
    with open_j(jpath) as j:
        j.record("r1", "alpha", content_hash=H1)
    torn = b'{"content_hash":"' + H1.encode() + b'","kind":"lab'
    with open(jpath, "ab") as f:
        f.write(torn)
    # a torn last line is what a crash leaves: verify notes it and does not fail (issue 12, item 7)
    probs, notes, _ = verify_report(jpath)
    assert probs == [] and any("incomplete" in n for n in notes)
    with open_j(jpath, readonly=True) as r:
        assert any("incomplete" in w for w in r.warnings)
        assert r.final_label("r1") == "alpha"
    assert jpath.read_bytes().endswith(torn)  # read-only leaves it
    with open_j(jpath) as j:
        assert any("moved to" in w for w in j.warnings)
        j.record("r2", "beta", content_hash=H1)
    sides = list(jpath.parent.glob(jpath.name + ".torn-*"))
    assert len(sides) == 1 and sides[0].read_bytes() == torn
    assert verify_journal(jpath) == []


def test_writer_refuses_damaged_or_cut_journal(jpath):
    with open_j(jpath) as j:
        for i in range(3):
            j.record(f"r{i}", "alpha", content_hash=H1)
    lines = jpath.read_bytes().split(b"\n")
    jpath.write_bytes(b"\n".join(lines[:2] + lines[3:]))  # delete event 2
    with pytest.raises(JournalError, match=r"damaged: line 3 \(event 3\): sequence number 3 where 2"):
        open_j(jpath)
    jpath.write_bytes(b"\n".join(lines[:3]) + b"\n")  # cut the last event
    with pytest.raises(JournalError, match="events were removed"):
        open_j(jpath)
    assert not (jpath.parent / (jpath.name + ".lock")).exists()  # a refused open leaves no lock


def test_missing_head_is_refused_until_recover(jpath):
    # a missing head with no crash behind it is no longer "restored" by any writer (issue 12, item 2):
    # only recover accepts it, and records that it did
    with open_j(jpath) as j:
        j.record("r1", "alpha", content_hash=H1)
    head_path(jpath).unlink()
    assert [p.what for p in verify_journal(jpath)] == ["head"]
    with pytest.raises(JournalError, match="head file is missing"):
        open_j(jpath)
    assert not head_path(jpath).exists()
    ev = LabelJournal.recover(jpath, by="chief", reason="head deleted by a sync tool")
    assert ev["head_was"] == "missing" and ev["set_aside_file"] is None and ev["reason"].startswith("head")
    assert verify_journal(jpath) == []
    with open_j(jpath) as j:
        assert j.final_label("r1") == "alpha"


def test_change_on_disk_under_a_writer_is_refused(jpath):
    with open_j(jpath) as j:
        j.record("r1", "alpha", content_hash=H1)
        with open(jpath, "ab") as f:
            f.write(b"{}\n")
        with pytest.raises(JournalError, match="changed on disk"):
            j.record("r2", "alpha", content_hash=H1)


def test_verify_reports_data_changed_and_missing_runs(jpath):
    with open_j(jpath) as j:
        j.record("r1", "alpha", content_hash=H1)
        j.record("r2", "beta", content_hash=H1)
        j.record("r2", "alpha", content_hash=H2, reason="relabeled after rerun")
        j.record("r3", "beta", content_hash=H1)
        st = j.state({"r1": H2, "r2": H2})
    probs = verify_journal(jpath, {"r1": H2, "r2": H2})
    kinds = {p.what: p for p in probs}
    assert set(kinds) == {"data_changed", "run_missing"}
    assert kinds["data_changed"].event == 1 and "r1" in kinds["data_changed"].message
    assert "data changed since labeled" in kinds["data_changed"].message
    assert kinds["run_missing"].event == 4
    changed = st.set_index("run")["data_changed"]
    assert changed.dtype == "boolean"
    assert changed["r1"] is True or bool(changed["r1"]) is True
    assert bool(changed["r2"]) is False
    assert pd.isna(changed["r3"])  # not in the given hashes: unknown, not "unchanged"


def test_review_events(jpath):
    with open_j(jpath, labeler="chief") as j:
        ev = j.adjudicate("r1", "beta", content_hash=H1, label_a="alpha", label_b="beta", reviewer="chief",
                          reason="C4-C9 bond forms first")
        assert ev["source"] == "review" and ev["label_a"] == "alpha" and ev["reviewer"] == "chief"
        done = j.review_complete(reviewer="chief", summary={"kappa": 0.8, "n": 40})
        assert done["kind"] == "review_complete" and done["summary"]["n"] == 40
        assert j.final_label("r1") == "beta"
    assert verify_journal(jpath) == []


def test_failed_write_reports_nothing_saved_and_next_open_recovers(jpath, monkeypatch):
    j = open_j(jpath)
    j.record("r1", "alpha", content_hash=H1)
    real_write = os.write

    def half_then_fail(fd, data):
        if fd == j._fd:
            real_write(fd, bytes(data[: len(data) // 2]))
            raise OSError(28, "No space left on device")
        return real_write(fd, data)
    monkeypatch.setattr(os, "write", half_then_fail)
    with pytest.raises(JournalError, match="could not be saved.*No space left"):
        j.record("r2", "beta", content_hash=H1)
    monkeypatch.undo()
    with pytest.raises(JournalError, match="closed"):
        j.record("r3", "beta", content_hash=H1)
    j.close()
    # the failed write was cut back at once (issue 12, item 4): nothing is left to set aside
    with open_j(jpath) as again:
        assert again.warnings == []
        assert again.final_label("r2") is None
        again.record("r2", "beta", content_hash=H1)
    assert verify_journal(jpath) == []


@pytest.mark.parametrize("bad", ["beta\nx", "beta\u2028x", "beta\u2029x", "beta\x85x", "beta\x9bx", "beta\x7f"])
def test_labels_with_line_breaks_or_control_characters_are_refused(bad):
    from basinmark.core.labels import LabelError, validate_label

    with pytest.raises(LabelError, match="control characters or line breaks"):
        validate_label(bad)
    assert validate_label("bêta-2") == "bêta-2"  # other Unicode is fine


def test_undo_takes_back_the_persons_label_below_a_later_automatic_one(tmp_path):
    from basinmark.core.journal import LabelJournal

    with LabelJournal.open(tmp_path / "j.jsonl", labeler="mira") as j:
        j.record_batch([{"run_id": "r1", "label": "alpha", "content_hash": "h"}], rules_hash="a" * 64)
        hand = j.record("r1", "beta", content_hash="h", reason="looked")
        j.record_batch([{"run_id": "r1", "label": "unfinished", "content_hash": "h"}], rules_hash="b" * 64)
        u = j.undo("r1", reason="misclick")
        assert u["undoes"] == hand["seq"] and u["replaces"] == "beta" and u["label"] == "unfinished"
        st = j.state().set_index("run")
        assert st.loc["r1", "auto_label"] == "unfinished" and pd.isna(st.loc["r1", "hand_label"])
    # a fresh replay of the file agrees (the undo names the event it takes back)
    again = LabelJournal.open(tmp_path / "j.jsonl", readonly=True)
    assert again.final_label("r1") == "unfinished" and again.auto_event("r1")["rules_hash"] == "b" * 64
    again.close()
