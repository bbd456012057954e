"""Journal import/export and replay against a simple model (hypothesis)."""

from __future__ import annotations

import importlib.util

import pandas as pd
import pytest
from hypothesis import given
from hypothesis import strategies as st

from basinmark.core.errors import BasinmarkError
from basinmark.core.journal import LabelJournal, verify_journal
from basinmark.core.journal_io import LabelImportError, export_labels, import_labels
from basinmark.core.labels import all_labels

ALLOWED = all_labels(["alpha", "beta"])
RUNS = {f"r{i}": f"{i:064x}" for i in range(6)}


@pytest.fixture
def journal(tmp_path):
    with LabelJournal.open(tmp_path / "basinmark-labels.jsonl", labeler="mira", allowed=ALLOWED) as j:
        yield j


def write(tmp_path, text, name="in.csv"):
    p = tmp_path / name
    p.write_text(text, encoding="utf-8")
    return p


def test_import_is_all_or_nothing_with_every_bad_row_listed(journal, tmp_path):
    size = journal.path.stat().st_size
    p = write(tmp_path, "run,label,reason\nr0,alpha,\nr9,beta,\nr1,delta,\nr2,excluded,\nr0,beta,\n,alpha,\n")
    with pytest.raises(LabelImportError) as err:
        import_labels(journal, p, runs=RUNS, allowed=ALLOWED)
    probs = err.value.problems
    assert probs == [f"{p}, line 3: unknown run 'r9' (not in the set)",
                     f"{p}, line 4: unknown label 'delta'; allowed labels are: {', '.join(ALLOWED)}",
                     f"{p}, line 5: the label 'excluded' needs a reason (say why the run is left out)",
                     f"{p}, line 6: run 'r0' appears again (first on line 2)",
                     f"{p}, line 7: no run id"]
    assert "nothing was imported" in str(err.value)
    assert journal.path.stat().st_size == size and journal.state().empty


def test_import_header_and_form(journal, tmp_path):
    with pytest.raises(LabelImportError, match="lacks the column"):
        import_labels(journal, write(tmp_path, "id,outcome\nr0,alpha\n"), runs=RUNS, allowed=ALLOWED)
    with pytest.raises(LabelImportError, match="no labels"):
        import_labels(journal, write(tmp_path, "run,label\n"), runs=RUNS, allowed=ALLOWED)
    with pytest.raises(LabelImportError, match="more cells than columns"):
        import_labels(journal, write(tmp_path, "run,label\nr0,alpha,extra\n"), runs=RUNS, allowed=ALLOWED)
    with pytest.raises(BasinmarkError, match="cannot read"):
        import_labels(journal, tmp_path / "missing.csv", runs=RUNS, allowed=ALLOWED)
    # a spreadsheet's byte-order mark, spaces in the header and blank rows are fine
    p = tmp_path / "bom.csv"
    p.write_bytes("\ufeffrun , label,labeler,reason\r\nr0,alpha,ana,\r\n,,,\r\nr1,excluded,,drift\r\n".encode())
    evs = import_labels(journal, p, runs=RUNS, allowed=ALLOWED, labeler="ines")
    assert [(e["run"], e["label"], e["labeler"], e["source"]) for e in evs] == [
        ("r0", "alpha", "ana", "import"), ("r1", "excluded", "ines", "import")]
    assert evs[0]["content_hash"] == RUNS["r0"] and len({e["time"] for e in evs}) == 1
    assert verify_journal(journal.path, RUNS) == []


def test_export_csv_round_trip(journal, tmp_path):
    journal.record_batch([{"run_id": r, "label": "alpha", "content_hash": h} for r, h in RUNS.items()])
    journal.record("r2", "beta", content_hash=RUNS["r2"], reason='says "beta", clearly')
    out = export_labels(journal, tmp_path / "labels.csv", {**RUNS, "r3": "0" * 64})
    back = pd.read_csv(out, keep_default_na=False)
    assert list(back["run"]) == list(RUNS) and back.loc[2, "final_label"] == "beta"
    assert back.loc[2, "reason"] == 'says "beta", clearly'
    assert list(back["data_changed"]) == [False, False, False, True, False, False]
    if importlib.util.find_spec("pyarrow") is None:
        with pytest.raises(BasinmarkError, match="pyarrow"):
            export_labels(journal, tmp_path / "labels.parquet")
    else:
        pq = export_labels(journal, tmp_path / "labels.parquet")
        assert pd.read_parquet(pq)["final_label"].tolist() == back["final_label"].tolist()


OPS = st.lists(st.tuples(st.sampled_from(["rule", "hand", "import", "review", "undo"]),
                         st.sampled_from(["r0", "r1", "r2"]), st.sampled_from(["alpha", "beta", "ambiguous"])),
               max_size=40)


@given(OPS)
def test_replay_matches_a_list_model(tmp_path_factory, ops):
    path = tmp_path_factory.mktemp("replay") / "j.jsonl"
    active: list[tuple[str, str, str]] = []  # the model: every label not taken back, oldest first
    with LabelJournal.open(path, labeler="mira") as j:
        for source, run, label in ops:
            if source == "undo":
                mine = [k for k, a in enumerate(active) if a[1] == run]
                if not mine:
                    with pytest.raises(BasinmarkError):
                        j.undo(run)
                    continue
                j.undo(run)
                # an undo takes back the latest label a person set, else the latest automatic one
                people = [k for k in mine if active[k][0] != "rule"]
                del active[(people or mine)[-1]]
            else:
                j.record(run, label, content_hash="ab" * 32, source=source)
                active.append((source, run, label))
        state = j.state().set_index("run")
    for run in {op[1] for op in ops if op[0] != "undo"}:
        mine = [a for a in active if a[1] == run]
        auto = [a[2] for a in mine if a[0] == "rule"]
        hand = [a[2] for a in mine if a[0] != "rule"]
        expect_final = (hand or auto or [None])[-1]
        assert state.loc[run, "final_label"] == expect_final or (expect_final is None
                                                                   and pd.isna(state.loc[run, "final_label"]))
        assert (auto or [None])[-1] == (None if pd.isna(state.loc[run, "auto_label"]) else state.loc[run, "auto_label"])
    with LabelJournal.open(path, readonly=True) as r:
        assert r.state().equals(state.reset_index())
    assert verify_journal(path) == []
