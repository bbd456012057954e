"""Spreadsheet safety and the export → import round trip.

Text cells that begin with =, +, -, @, a tab or a carriage return are written with a leading single
quote (OWASP, "CSV Injection"), in every CSV the program writes; numbers stay numbers; the import takes
exactly that quote off again, so a round trip loses nothing.
"""

from __future__ import annotations

import csv
import io
import shutil

import pandas as pd
import pytest
from hypothesis import given
from hypothesis import strategies as st

from basinmark.cli import main
from basinmark.commands._output import emit
from basinmark.core.csv_safe import TRIGGERS, csv_text, neutralise_cell, restore_cell
from basinmark.core.journal import LabelJournal
from basinmark.core.report import summary_text, write_label_table
from test_faults import JOURNAL, build_set, labels

FORMULAS = ['=HYPERLINK("http://example.invalid/x","open me")', "+1 second look", "-alpha, not beta",
            "@SUM(A1:A9)", "'=already quoted once", "''+twice"]


# --- the cell rule -------------------------------------------------------------------------------------

@given(st.text())
def test_restore_undoes_neutralise_exactly(text):
    safe = neutralise_cell(text)
    assert restore_cell(safe) == text
    assert not safe[:1] or safe[0] not in TRIGGERS  # a spreadsheet never sees a formula start


@pytest.mark.parametrize("cell, written", [("=1+2", "'=1+2"), ("+x", "'+x"), ("-x", "'-x"), ("@x", "'@x"),
                                           ("\tx", "'\tx"), ("\rx", "'\rx"), ("'=x", "''=x"), ("'hi", "'hi"),
                                           ("plain", "plain"), ("a=b", "a=b"), ("", "")])
def test_cells_as_owasp_says(cell, written):
    assert neutralise_cell(cell) == written and restore_cell(written) == cell


def test_numbers_stay_numbers_and_text_is_quoted_in_every_writer(tmp_path):
    df = pd.DataFrame({"run": ["-r1", "r2"], "commit_time_fs": [-12.5, 30.0], "events": [-1, 2],
                       "reason": ["=2*3", None], "data_changed": [True, False]})
    text = csv_text(df)
    # read back with Python's own csv module (the reference reader): numbers unquoted, text quoted once
    rows = list(csv.reader(io.StringIO(text)))
    assert rows[1] == ["'-r1", "-12.5", "-1", "'=2*3", "True"] and rows[2] == ["r2", "30.0", "2", "", "False"]
    back = pd.read_csv(io.StringIO(text))
    assert back["commit_time_fs"].tolist() == [-12.5, 30.0] and back["events"].tolist() == [-1, 2]
    # the window's label table export, --format csv, and the summary's CSV all go through it
    out = write_label_table(df, tmp_path / "t.csv").read_text()
    assert "'=2*3" in out and ",-12.5," in out
    buf = io.StringIO()
    emit(df, "csv", buf)
    assert buf.getvalue() == text

    class FakeSummary:
        def to_frame(self):
            return pd.DataFrame({"quantity": ["-ratio", "ddg"], "value": [-0.25, 1.5]})

    assert summary_text(FakeSummary(), "csv").splitlines()[1:] == ["'-ratio,-0.25", "ddg,1.5"]


# --- export → import into a fresh copy ---------------------------------------------------------------

@pytest.fixture(scope="module")
def labeled(tmp_path_factory):
    root = build_set(tmp_path_factory.mktemp("rt") / "twinpath")  # classified, t01 labeled by ines
    steps = [["label", root, "t00", "beta", "--reason", FORMULAS[0], "--as", "ana"],
             ["label", root, "t02", "alpha", "--reason", FORMULAS[1], "--as", "ines"],
             ["label", root, "t03", "excluded", "--reason", FORMULAS[2], "--as", "tomas"],
             ["label", root, "t04", "ambiguous", "--reason", FORMULAS[3]],
             ["label", root, "t05", "alpha", "--reason", FORMULAS[4], "--as", "ana"],
             ["label", root, "t06", "beta", "--reason", FORMULAS[5], "--as", "ana"],
             ["label", root, "t06", "alpha", "--reason", "changed my mind", "--as", "ana"],
             ["label", root, "t07", "beta", "--as", "ines"], ["undo", root, "t07", "--as", "ines"]]
    for argv in steps:
        assert main([str(a) for a in argv]) == 0
    return root


def fresh_copy(root, dest):
    """The runs and rules only: no journal, no cache, then classified like the original."""
    shutil.copytree(root, dest, ignore=shutil.ignore_patterns("basinmark-labels*", ".basinmark-cache"))
    assert main(["classify", str(dest)]) == 0
    return dest


@pytest.mark.parametrize("how", ["file", "stdout"])
def test_export_imports_as_it_is_into_a_fresh_copy(labeled, tmp_path, capsys, how):
    out_csv = tmp_path / "labels.csv"
    if how == "file":
        assert main(["export-labels", str(labeled), "-o", str(out_csv)]) == 0
    else:
        capsys.readouterr()
        assert main(["export-labels", str(labeled), "--format", "csv"]) == 0
        out_csv.write_text(capsys.readouterr().out, encoding="utf-8")
    raw = out_csv.read_text(encoding="utf-8")
    # formula cells are neutralised in the file
    rows = {r["run"]: r for r in csv.DictReader(io.StringIO(raw))}
    assert rows["t00"]["reason"] == "'" + FORMULAS[0] and rows["t02"]["reason"] == "'" + FORMULAS[1]
    assert rows["t05"]["reason"] == "'" + FORMULAS[4] and rows["t06"]["reason"] == "changed my mind"
    assert rows["t07"]["label"] == "" and rows["t07"]["hand_label"] == ""  # undone: automatic only
    copy = fresh_copy(labeled, tmp_path / "copy")
    capsys.readouterr()
    code = main(["import-labels", str(copy), str(out_csv)])
    out, err = capsys.readouterr()
    assert code == 0, err
    assert "7 labels imported" in out and "carry only an automatic label" in out
    original, again = labels(labeled), labels(copy)
    assert again == original  # every final label, hand label, labeler and reason, FORMULAS restored
    assert again["t00"]["reason"] == FORMULAS[0] and again["t05"]["reason"] == FORMULAS[4]
    with LabelJournal.open(copy / JOURNAL, readonly=True) as j:
        assert {ev["source"] for ev in j.events[1:]} == {"rule", "import"}


def test_csv_floats_round_trip_whatever_numpy_print_options_say():
    """A library that sets numpy's legacy print mode must not cut the floats we write (it did: 12 digits)."""
    import numpy as np
    import pandas as pd

    from basinmark.core.csv_safe import csv_text

    saved = np.get_printoptions()
    try:
        np.set_printoptions(legacy="1.13")
        text = csv_text(pd.DataFrame({"t": [1.6576757817642004e-102, 100.72813570917981, -0.5]}))
    finally:
        np.set_printoptions(**saved)
    assert text.splitlines()[1:] == ["1.6576757817642004e-102", "100.72813570917981", "-0.5"]
