"""The label commands end to end on a small written set (real loading, rules, classification, journal)."""

from __future__ import annotations

import json
import os
import socket
import subprocess
import sys

import numpy as np
import pandas as pd
import pytest

from basinmark.cli import main
from basinmark.core.journal import LabelJournal
from basinmark.core.journal_lock import lock_path
from rules_examples import two_bond_rules  # noqa: E402

RULES = two_bond_rules("twinpath", "start", 15.0)

ENDS = {"alpha": (1.5, 3.0), "beta": (3.0, 1.5), "recrossing": (3.0, 3.0)}
PLAN = ["alpha", "alpha", "beta", "alpha", "recrossing", "beta", "alpha", "alpha"]


def write_half(path, r_a, r_b, step_fs=5.0):
    lines = []
    for i, (a, b) in enumerate(zip(r_a, r_b)):
        lines += ["3", f"time={i * step_fs:.1f} epot=-2.000 ekin=0.700",
                  "N 0.0 0.0 0.0", f"H {a:.4f} 0.0 0.0", f"H 0.0 {b:.4f} 0.0"]
    path.write_text("\n".join(lines) + "\n")


def ramp(start, end, frames=25, reach=6):
    return np.concatenate([np.linspace(start, end, reach), np.full(frames - reach, end)])


@pytest.fixture
def small_set(tmp_path):
    root = tmp_path / "twinpath"
    root.mkdir()
    for i, outcome in enumerate(PLAN):
        write_half(root / f"t{i:02d}.bwd.xyz", ramp(2.0, 3.0), ramp(2.0, 3.0))
        fa, fb = ENDS[outcome]
        write_half(root / f"t{i:02d}.fwd.xyz", ramp(2.0, fa), ramp(2.0, fb))
    (root / "basins.toml").write_text(RULES)
    from basinmark.core.classify import classify_set, write_automatic_labels
    from basinmark.core.rules import load_rules
    from basinmark.core.sets import journal_path, open_set, rules_path
    tset = open_set(root, use_cache=False)
    rules = load_rules(rules_path(root), n_atoms=tset.n_atoms)
    with LabelJournal.open(journal_path(root), labeler="auto-run") as j:
        assert write_automatic_labels(j, classify_set(tset, rules), rules) == len(PLAN)
        assert [j.final_label(f"t{i:02d}") for i in range(len(PLAN))] == PLAN
    return root


def run(argv, capsys):
    code = main([str(a) for a in argv])
    out, err = capsys.readouterr()
    return code, out, err


def test_label_undo_history(small_set, capsys):
    code, out, err = run(["label", small_set, "t01", "beta", "--reason", "second bond wins", "--as", "ines",
                          "--no-cache"], capsys)
    assert code == 0, err
    assert "t01" in out and "beta" in out and "ines" in out
    with LabelJournal.open(small_set / "basinmark-labels.jsonl", readonly=True) as j:
        assert j.final_label("t01") == "beta" and j.events[-1]["labeler"] == "ines"
    # the hash taken from the one run read for the label is the one the whole set gives
    code, out, err = run(["verify", small_set, "--no-cache"], capsys)
    assert code == 0 and "intact" in out, out
    code, out, err = run(["undo", small_set, "t01", "--as", "ines"], capsys)
    assert code == 0 and "now alpha" in out
    code, out, err = run(["history", small_set, "t01"], capsys)
    assert code == 0 and out.count("label") >= 2 and "undo" in out
    assert run(["history", small_set, "nosuch"], capsys)[0] == 2


def test_label_refuses_bad_input(small_set, capsys):
    code, out, err = run(["label", small_set, "t01", "gamma", "--no-cache"], capsys)
    assert code == 2 and "unknown label 'gamma'" in err and "alpha, beta, recrossing" in err
    code, out, err = run(["label", small_set, "t99", "beta", "--no-cache"], capsys)
    assert code == 2 and "no run 't99'" in err
    code, out, err = run(["label", small_set, "t01", "excluded", "--no-cache"], capsys)
    assert code == 2 and "needs a reason" in err
    code, out, err = run(["label", small_set, "t01", "excluded", "--reason", "energy check failed",
                          "--no-cache"], capsys)
    assert code == 0


def test_verify_finds_changed_data_and_tampering(small_set, capsys):
    code, out, err = run(["verify", small_set, "--no-cache"], capsys)
    assert code == 0, out + err
    assert "intact" in out and "hash" in out
    with open(small_set / "t03.fwd.xyz", "a") as f:  # the run's data change after labeling
        f.write("\n")
    code, out, err = run(["verify", small_set, "--no-cache"], capsys)
    assert code == 1 and "data changed since labeled" in out and "t03" in out
    code, out, err = run(["verify", small_set, "--no-data"], capsys)
    assert code == 0
    jp = small_set / "basinmark-labels.jsonl"
    jp.write_bytes(jp.read_bytes().replace(b'"label":"beta"', b'"label":"alfa"', 1))
    code, out, err = run(["verify", small_set, "--no-data"], capsys)
    assert code == 1 and "changed after it was written" in out


def test_compare_labelers_and_journals(small_set, tmp_path, capsys):
    for run_id, lab in [("t00", "alpha"), ("t01", "beta"), ("t02", "beta"), ("t04", "alpha")]:
        assert run(["label", small_set, run_id, lab, "--as", "ines", "--no-cache"], capsys)[0] == 0
    report = tmp_path / "review.md"
    code, out, err = run(["compare", small_set, "--labelers", "auto", "hand", "-o", report], capsys)
    assert code == 0, err
    assert "runs labeled by both: 4" in out and "agreement: 50.0 %" in out and "Cohen's kappa" in out
    assert "disagreements (2)" in out and "only 4 runs" in out
    md = report.read_text()
    assert md.startswith("# Review: auto vs hand") and "| t01 |" in md
    code, out, err = run(["compare", small_set, "--labelers", "hand", "hand"], capsys)
    assert code == 2 and "twice" in err
    code, out, err = run(["compare", small_set, "--labelers", "auto", "nobody"], capsys)
    assert code == 2 and "no labeler 'nobody'" in err
    code, out, err = run(["compare", small_set], capsys)
    assert code == 2
    other = tmp_path / "copy.jsonl"
    other.write_bytes((small_set / "basinmark-labels.jsonl").read_bytes())
    # a journal copied without its head file cannot show that it was not cut short: it is reported as damaged
    code, out, err = run(["compare", small_set, other, "--format", "json"], capsys)
    assert code == 3 and "head file is missing" in err
    (tmp_path / "copy.jsonl.head").write_bytes((small_set / "basinmark-labels.jsonl.head").read_bytes())
    code, out, err = run(["compare", small_set, other, "--format", "json"], capsys)
    data = json.loads(out)
    assert code == 0 and data["runs_compared"] == len(PLAN) and data["agreement"] == 1.0


def test_export_and_import(small_set, tmp_path, capsys):
    out_csv = tmp_path / "labels.csv"
    code, out, err = run(["export-labels", small_set, "-o", out_csv, "--no-cache"], capsys)
    assert code == 0, err
    table = pd.read_csv(out_csv)
    assert list(table.columns) == ["run", "label", "auto_label", "hand_label", "final_label", "labeler", "time",
                                   "reason", "events", "data_changed"]
    assert list(table["final_label"]) == PLAN and not table["data_changed"].any()
    code, out, err = run(["export-labels", small_set, "-o", tmp_path / "labels.parquet", "--no-data"], capsys)
    try:
        import pyarrow  # noqa: F401
        assert code == 0
    except ImportError:
        assert code == 2 and "pyarrow" in err
    jp = small_set / "basinmark-labels.jsonl"
    before = jp.read_bytes()
    bad = tmp_path / "bad.csv"
    bad.write_text("run,label,reason\nt00,beta,\nt77,alpha,\nt02,gamma,\nt03,excluded,\n")
    code, out, err = run(["import-labels", small_set, bad, "--no-cache"], capsys)
    assert code == 2 and "nothing was imported" in err
    assert f"{bad}, line 3: unknown run 't77'" in err and f"{bad}, line 4: unknown label 'gamma'" in err
    assert f"{bad}, line 5" in err and "needs a reason" in err
    assert jp.read_bytes() == before  # all or nothing
    good = tmp_path / "good.csv"
    good.write_text("run,label,labeler,reason\nt00,beta,tomas,ring opens late\nt03,excluded,,drift\n")
    code, out, err = run(["import-labels", small_set, good, "--as", "ines", "--no-cache"], capsys)
    assert code == 0 and "2 labels imported" in out
    with LabelJournal.open(jp, readonly=True) as j:
        st = j.state().set_index("run")
        assert st.loc["t00", "final_label"] == "beta" and st.loc["t00", "labeler"] == "tomas"
        assert st.loc["t03", "labeler"] == "ines" and j.events[-1]["source"] == "import"


def test_unlock_breaks_only_stale_locks(small_set, capsys):
    jp = small_set / "basinmark-labels.jsonl"
    done = subprocess.run([sys.executable, "-c", "import os; print(os.getpid())"], capture_output=True, text=True)
    dead_pid = int(done.stdout)
    lock = {"owner": "ana", "host": socket.gethostname(), "pid": os.getpid(), "time": "2026-01-01T00:00:00.000Z",
            "token": "x"}
    lock_path(jp).write_text(json.dumps(lock))
    code, out, err = run(["label", small_set, "t01", "beta", "--no-cache"], capsys)
    assert code == 2 and "being written by ana" in err
    code, out, err = run(["unlock", small_set, "--as", "chief"], capsys)
    assert code == 2 and "may still be running" in err  # our own pid is alive
    lock_path(jp).write_text(json.dumps(dict(lock, pid=dead_pid)))
    code, out, err = run(["unlock", small_set, "--as", "chief", "--reason", "ana's laptop crashed"], capsys)
    assert code == 0 and "was broken" in out and "ana" in out
    assert not lock_path(jp).exists()
    with LabelJournal.open(jp, readonly=True) as j:
        ev = j.events[-1]
        assert ev["kind"] == "lock_broken" and ev["labeler"] == "chief" and ev["old_lock"]["pid"] == dead_pid
    assert run(["unlock", small_set], capsys)[0] == 2  # nothing to unlock
