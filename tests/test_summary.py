"""Tests of the summary (core.summary) and the ``basinmark summary`` command."""

from __future__ import annotations

import json
import math
import sys
import types

import numpy as np
import pandas as pd
import pytest

from basinmark.core import stats
from basinmark.core.model import SourceFile, Trajectory, TrajectorySet
from basinmark.core.summary import SummaryError, build_summary
from basinmark.core.tst import TSTError, TSTEstimate
from rules_examples import two_bond_rules  # noqa: E402

PRODUCTS = ["alpha", "beta"]


def label_frame(counts: dict[str, int], extra_missing: int = 0) -> pd.DataFrame:
    labels = [name for name, k in counts.items() for _ in range(k)] + [None] * extra_missing
    return pd.DataFrame({"run": [f"run-{i:04d}" for i in range(len(labels))], "final_label": labels})


# --- core.summary -------------------------------------------------------------------------


def test_summary_numbers_match_stats():
    labels = label_frame({"alpha": 128, "beta": 32, "recrossing": 30, "unfinished": 10, "excluded": 3}, 2)
    s = build_summary(labels, PRODUCTS, "alpha", "beta", ddg=0.30)
    assert (s.a, s.b, s.k_a, s.k_b) == ("alpha", "beta", 128, 32)
    assert (s.n_runs, s.n_counted, s.n_excluded, s.n_unlabeled) == (205, 200, 3, 2)
    assert s.ratio == stats.ratio_interval(128, 32)
    assert s.tst_ratio == stats.tst_ratio(0.30)
    assert s.effective_ddg == tuple(stats.effective_ddg(v) for v in stats.ratio_interval(128, 32))
    assert list(s.table["label"]) == ["alpha", "beta", "recrossing", "unfinished"]
    # runs needed: runs_needed(0.8, 0.05) = ceil(1.959964² · 0.16 / 0.0025) = 246 runs of alpha or beta,
    # which are 160 of 200 counted runs → ceil(246 / 0.8) = 308 runs in all (hand computation)
    assert stats.runs_needed(0.8, 0.05) == 246 and s.runs_needed == 308
    last = s.convergence.iloc[-1]
    assert (last["n_a"], last["n_b"]) == (128, 32) and last["ratio"] == 4.0


def test_summary_text_report_reads_plainly():
    labels = label_frame({"alpha": 128, "beta": 32, "recrossing": 30, "unfinished": 10, "excluded": 3}, 2)
    text = build_summary(labels, PRODUCTS, "alpha", "beta", ddg=0.30).to_text()
    r, lo, hi = stats.ratio_interval(128, 32)
    assert f"alpha : beta = 4.00 (95 % CI {lo:.2f}–{hi:.2f}) from 160 reactive runs" in text
    assert "TST with ΔΔG‡ = 0.30 kcal/mol (G‡(beta) − G‡(alpha)) at 298.15 K predicts 1.66" in text
    assert "outside the observed interval" in text
    assert f"Effective ΔΔG = {stats.effective_ddg(4.0):.2f} kcal/mol" in text
    assert "3 runs were excluded" in text and "2 runs have no label" in text
    assert text.index("alpha : beta") < text.index("TST with") < text.index("Effective") < text.index("Warnings:")


def test_summary_defaults_to_the_two_most_common_products_and_accepts_a_choice():
    labels = label_frame({"gamma": 50, "beta": 30, "alpha": 5})
    s = build_summary(labels, ["alpha", "beta", "gamma"])
    assert (s.a, s.b) == ("gamma", "beta")
    assert "runs ending in gamma or beta" in s.to_text()
    s = build_summary(labels, ["alpha", "beta", "gamma"], a="alpha")
    assert (s.a, s.b) == ("alpha", "gamma")
    with pytest.raises(SummaryError, match="not a product"):
        build_summary(labels, ["alpha", "beta", "gamma"], a="delta")
    with pytest.raises(SummaryError, match="itself"):
        build_summary(labels, ["alpha", "beta", "gamma"], a="beta", b="beta")


def test_summary_kj_per_mol_agrees_with_kcal():
    labels = label_frame({"alpha": 95, "beta": 5})
    kcal = build_summary(labels, PRODUCTS, "alpha", "beta", ddg=1.0)
    kj = build_summary(labels, PRODUCTS, "alpha", "beta", ddg=4.184, unit="kJ/mol")  # 1 cal = 4.184 J (thermochemical calorie)
    assert kj.tst_ratio == pytest.approx(kcal.tst_ratio, rel=1e-12)
    # derived check (REFERENCES.md): 95:5 at 298.15 K is RT ln 19 = 1.745 kcal/mol = 7.30 kJ/mol
    assert kcal.effective_ddg[0] == pytest.approx(1.745, abs=5e-4)
    assert kj.effective_ddg[0] == pytest.approx(1.745 * 4.184, abs=2e-3)
    assert "kJ/mol" in kj.to_text()


def test_thin_data_is_flagged_and_zero_counts_are_stated():
    s = build_summary(label_frame({"alpha": 6}), PRODUCTS, "alpha", "beta", ddg=0.3)
    text = s.to_text()
    assert math.isinf(s.ratio[0]) and math.isinf(s.ratio[2])
    assert "Only 6 runs reached a product" in text and "No run gave beta" in text
    assert "cannot be estimated until both products have appeared" in text and s.runs_needed is None
    empty = build_summary(label_frame({"recrossing": 4}), PRODUCTS)
    assert math.isnan(empty.ratio[0]) and "undefined" in empty.to_text()
    assert any("No run reached a product" in w for w in empty.warnings)


def test_ample_data_has_no_warnings():
    s = build_summary(label_frame({"alpha": 300, "beta": 200, "recrossing": 40, "unfinished": 10}), PRODUCTS)
    assert s.warnings == [] and "Warnings" not in s.to_text()


def test_changed_data_is_warned():
    labels = label_frame({"alpha": 40, "beta": 40})
    labels["data_changed"] = pd.array([True, True] + [False] * 77 + [pd.NA], dtype="boolean")
    s = build_summary(labels, PRODUCTS)
    assert any("2 labels were set on run files that have changed" in w for w in s.warnings)


def test_single_product_rules_give_no_ratio():
    s = build_summary(label_frame({"alpha": 40, "recrossing": 5}), ["alpha"])
    assert s.b is None and s.tst_ratio is None
    text = s.to_text()
    assert "product ratio" not in text and "Reactive fraction" in text and "Transmission coefficient" in text
    with pytest.raises(TSTError, match="'beta' is not a product of the rules"):
        build_summary(label_frame({"alpha": 40}), ["alpha"], tst=TSTEstimate.pair("alpha", "beta", 1.0))


def test_renderings_json_frame_markdown():
    s = build_summary(label_frame({"alpha": 20, "beta": 0, "recrossing": 3}), PRODUCTS, "alpha", "beta", ddg=0.5, method="exact")
    data = json.loads(s.to_json())  # strict JSON: infinities must be encoded, NaN must not appear
    assert data["ratio"]["hi"] == "inf" and data["ratio"]["value"] == "inf"
    assert data["ratio"]["lo"] == pytest.approx(stats.ratio_interval(20, 0, method="exact")[1])
    assert data["settings"]["method"] == "exact" and data["n_counted"] == 23
    frame = s.to_frame()
    assert list(frame["quantity"]) == ["fraction"] * 3 + ["ratio", "tst_ratio", "effective_ddg", "reactive_fraction",
                                                          "recrossing_fraction", "transmission_coefficient"]
    assert frame.loc[frame["label"] == "alpha", "value"].item() == pytest.approx(20 / 23)
    md = s.to_markdown()
    assert "| alpha | 20 |" in md and "### Warnings" in md and "Clopper–Pearson exact" in md
    assert "Clopper–Pearson exact" in s.to_text()
    assert "Wilson score" in build_summary(label_frame({"alpha": 2}), PRODUCTS).to_text()


def test_bad_settings_are_refused():
    labels = label_frame({"alpha": 3})
    for kwargs in ({"method": "normal"}, {"confidence": 95}, {"temperature": -4}, {"unit": "kcal"},
                   {"half_width": 0}):
        with pytest.raises(SummaryError):
            build_summary(labels, PRODUCTS, **kwargs)
    with pytest.raises(SummaryError, match="final_label"):
        build_summary(pd.DataFrame({"run": ["a"]}), PRODUCTS)


# --- the command, over a small fake set ---------------------------------------------------

RULES_TOML = two_bond_rules("forkdemo", "reactant", 20.0)

OUTCOMES = ["alpha"] * 30 + ["beta"] * 10 + ["recrossing"] * 4 + ["unfinished"] * 2


def fake_set(root, outcomes):
    runs = {}
    for i, outcome in enumerate(outcomes):
        rid = f"run-{i:03d}"
        t = Trajectory(run_id=rid, numbers=[6, 1, 1], positions=np.zeros((2, 3, 3)), times=[0.0, 1.0],
                       sources=(SourceFile(root / f"{rid}.xyz", f"{i:064x}"),), metadata={"outcome": outcome})
        runs[rid] = t
    return TrajectorySet(root, runs)


@pytest.fixture
def set_dir(tmp_path, monkeypatch):
    """A set folder with a rules file; open_set and classify_set replaced by fakes of their interfaces."""
    (tmp_path / "basins.toml").write_text(RULES_TOML)
    tset = fake_set(tmp_path, OUTCOMES)
    for rid in tset.run_ids:  # the run files on disk (empty: never read), so that the folder is a set
        (tmp_path / f"{rid}.xyz").touch()
    import basinmark.core.sets as sets
    monkeypatch.setattr(sets, "open_set", lambda path, **kw: tset)
    calls = []

    def classify_set(ts, rules, progress=None):
        calls.append(rules.products)
        return pd.DataFrame({"run": ts.run_ids, "outcome": [t.metadata["outcome"] for t in ts],
                             "flags": [t.metadata.get("flags", "") for t in ts]})

    fake = types.ModuleType("basinmark.core.classify")
    fake.classify_set = classify_set
    monkeypatch.setitem(sys.modules, "basinmark.core.classify", fake)
    return tmp_path, tset, calls


def run_cli(args, capsys):
    from basinmark.cli import main
    code = main(args)
    out, err = capsys.readouterr()
    return code, out, err


def test_command_classifies_in_memory_when_the_journal_is_empty(set_dir, capsys):
    root, tset, calls = set_dir
    code, out, err = run_cli(["summary", str(root), "--ddg", "alpha", "beta", "0.3"], capsys)
    assert code == 0, err
    assert calls == [["alpha", "beta"]]
    assert "not yet classified into the journal; run `basinmark classify SET`" in out
    r, lo, hi = stats.ratio_interval(30, 10)
    assert f"alpha : beta = 3.00 (95 % CI {lo:.2f}–{hi:.2f}) from 40 reactive runs" in out
    assert not (root / "basinmark-labels.jsonl").exists()  # nothing written


def test_command_reads_final_labels_from_the_journal(set_dir, capsys):
    from basinmark.core.journal import LabelJournal
    root, tset, calls = set_dir
    with LabelJournal.open(root / "basinmark-labels.jsonl", labeler="tester") as j:
        j.record_batch([{"run_id": t.run_id, "label": t.metadata["outcome"], "content_hash": t.content_hash}
                        for t in tset], rules_hash="0" * 64)
        # a hand label overrides the rule: one alpha becomes beta, one run is excluded
        j.record("run-000", "beta", content_hash=tset["run-000"].content_hash, reason="looked again")
        j.record("run-001", "excluded", content_hash=tset["run-001"].content_hash, reason="energy drift")
    code, out, err = run_cli(["summary", str(root), "--format", "json", "--method", "exact"], capsys)
    assert code == 0, err
    data = json.loads(out)
    assert calls == [["alpha", "beta"]]  # classified once in memory, only to re-check flags
    assert (data["ratio"]["k_a"], data["ratio"]["k_b"]) == (28, 11)
    assert data["n_excluded"] == 1 and data["settings"]["method"] == "exact"
    assert data["ratio"]["lo"] == pytest.approx(stats.ratio_interval(28, 11, method="exact")[1])
    assert "excluded by hand" in err  # warnings go to stderr for machine formats
    code, out, _ = run_cli(["summary", str(root), "--format", "csv", "--ratio", "beta", "alpha"], capsys)
    frame = pd.read_csv(__import__("io").StringIO(out))
    assert frame.loc[frame["quantity"] == "ratio", "value"].item() == pytest.approx(11 / 28)
    code, out, _ = run_cli(["summary", str(root), "--format", "markdown"], capsys)
    assert out.startswith("## Summary") and "| alpha | 28 |" in out


def test_command_reports_unlabeled_runs_and_bad_choices(set_dir, capsys):
    from basinmark.core.journal import LabelJournal
    root, tset, _ = set_dir
    with LabelJournal.open(root / "basinmark-labels.jsonl", labeler="tester") as j:
        for t in list(tset)[:20]:
            j.record(t.run_id, t.metadata["outcome"], content_hash=t.content_hash)
    code, out, _ = run_cli(["summary", str(root)], capsys)
    # the 26 runs with no label in the journal are counted by the rules' automatic labels, as the window counts them
    assert code == 0 and "no label yet" not in out and "Only 20 runs reached a product" not in out
    assert "26 runs of the set have no label in the journal: their automatic labels were computed in memory" in out
    (root / "basins.toml").unlink()  # without rules nothing can label them: they are not counted, and said so
    code, out, _ = run_cli(["summary", str(root)], capsys)
    assert code == 0 and "26 runs have no label yet" in out and "Only 20 runs reached a product" in out
    code, _, err = run_cli(["summary", str(root), "--ratio", "alpha", "gamma"], capsys)
    assert code == 2 and "'gamma' is not a product" in err
    code, _, err = run_cli(["summary", str(root / "nowhere")], capsys)
    assert code == 2 and "not a folder" in err


def test_command_rechecks_flags_and_stale_automatic_labels(set_dir, capsys):
    from basinmark.core.journal import LabelJournal
    root, tset, calls = set_dir
    with LabelJournal.open(root / "basinmark-labels.jsonl", labeler="tester") as j:
        j.record_batch([{"run_id": t.run_id, "label": t.metadata["outcome"], "content_hash": t.content_hash}
                        for t in tset], rules_hash="0" * 64)
        j.record("run-002", "alpha", content_hash=tset["run-002"].content_hash, reason="checked, fine")
    # the current rules now see three runs differently, and some runs are flagged
    tset["run-000"].metadata.update(outcome="beta", flags="energy_drift")
    tset["run-001"].metadata.update(outcome="unfinished", flags="late_commit;several_visits")
    tset["run-002"].metadata.update(outcome="recrossing", flags="energy_drift")
    code, out, _ = run_cli(["summary", str(root)], capsys)
    assert code == 0
    assert "3 of 46 automatic labels in the journal differ from what the current rules give" in out
    assert "2 counted runs failed the energy check" in out and "1 of them kept by hand" in out
    assert "1 counted run flagged for a look (late commit 1, several visits 1) has no hand label yet" in out
    # the counts still come from the journal: run-000 and run-001 are alpha there
    assert "alpha : beta = 3.00" in out
    calls.clear()
    code, out, _ = run_cli(["summary", str(root), "--no-recheck"], capsys)
    assert calls == [] and "energy check" not in out and "alpha : beta = 3.00" in out


def test_energy_check_warning_in_the_fallback_path(set_dir, capsys):
    root, tset, _ = set_dir
    for t in list(tset)[:4]:
        t.metadata["flags"] = "energy_drift;short_run"
    code, out, _ = run_cli(["summary", str(root)], capsys)
    assert "4 counted runs failed the energy check" in out and "none of them looked at by hand" in out
    assert "short run 4" in out


# --- end to end: real files, real set loading, classification and journal ----------------


def write_half(path, r_a, r_b, step_fs=5.0):
    """A three-atom XYZ half: atom 2 at distance r_a from atom 1, atom 3 at r_b (one value per frame)."""
    lines = []
    for i, (a, b) in enumerate(zip(r_a, r_b)):
        lines += ["3", f"time={i * step_fs:.1f} epot=-1.000 ekin=0.500",
                  "C 0.0 0.0 0.0", f"H {a:.4f} 0.0 0.0", f"H 0.0 {b:.4f} 0.0"]
    path.write_text("\n".join(lines) + "\n")


def ramp(start, end, frames=21, reach=6):
    """From start to end over ``reach`` frames, then stay (frames are 5 fs apart: 100 fs per half)."""
    return np.concatenate([np.linspace(start, end, reach), np.full(frames - reach, end)])


def test_command_end_to_end_on_a_small_written_set(tmp_path, capsys):
    ends = {"alpha": (1.5, 3.0), "beta": (3.0, 1.5), "recrossing": (3.0, 3.0), "unfinished": (2.0, 2.0)}
    plan = ["alpha"] * 9 + ["beta"] * 3 + ["recrossing"] * 2 + ["unfinished"]
    for i, outcome in enumerate(plan):
        write_half(tmp_path / f"run-{i:03d}.bwd.xyz", ramp(2.0, 3.0), ramp(2.0, 3.0))
        fa, fb = ends[outcome]
        write_half(tmp_path / f"run-{i:03d}.fwd.xyz", ramp(2.0, fa), ramp(2.0, fb))
    (tmp_path / "basins.toml").write_text(RULES_TOML)
    code, out, err = run_cli(["summary", str(tmp_path), "--quiet", "--no-cache"], capsys)
    assert code == 0, err
    assert "not yet classified into the journal" in out
    r, lo, hi = stats.ratio_interval(9, 3)
    assert (round(lo, 2), round(hi, 1)) == (0.88, 10.2)
    assert "alpha : beta = 3.00 (95 % CI 0.88–10.2) from 12 reactive runs (9 : 3)" in out
    assert "Only 12 runs reached a product" in out and "Only 3 runs gave beta" in out
    assert "unfinished" in out and not (tmp_path / "basinmark-labels.jsonl").exists()
    # record the automatic labels with the real classify/journal interfaces, then relabel one run by hand
    from basinmark.core.classify import classify_set, write_automatic_labels
    from basinmark.core.journal import LabelJournal
    from basinmark.core.rules import load_rules
    from basinmark.core.sets import journal_path, open_set, rules_path
    tset = open_set(tmp_path, use_cache=False)
    rules = load_rules(rules_path(tmp_path), n_atoms=tset.n_atoms)
    with LabelJournal.open(journal_path(tmp_path), labeler="tester") as j:
        assert write_automatic_labels(j, classify_set(tset, rules), rules) == len(plan)
        j.record("run-000", "excluded", content_hash=tset["run-000"].content_hash, reason="test: set aside")
    code, out, err = run_cli(["summary", str(tmp_path), "--quiet", "--no-cache", "--format", "json"], capsys)
    data = json.loads(out)
    assert code == 0 and data["notes"] == [] and data["n_excluded"] == 1
    assert (data["ratio"]["k_a"], data["ratio"]["k_b"]) == (8, 3)


def test_runs_needed_is_compared_with_the_counted_runs():
    # 30 a, 30 b, 300 excluded and 100 unlabeled: only 60 runs count, and the sentence must say so.
    # n = z^2 p(1-p)/h^2 at p = 0.5, h = 0.05: 1.95996^2 * 0.25 / 0.0025 = 384.1 -> 385 (normal approximation)
    import pandas as pd
    from basinmark.core.summary import build_summary

    labels = pd.DataFrame({"run": [f"r{i}" for i in range(460)],
                           "final_label": ["a"] * 30 + ["b"] * 30 + ["excluded"] * 300 + [None] * 100})
    s = build_summary(labels, ["a", "b"])
    assert s.runs_needed == 385 and s.n_counted == 60
    assert "325 more than the 60 counted here" in s.to_text()


def test_summary_with_a_missing_journal_file_says_so(tmp_path, capsys):
    from basinmark.cli import main

    (tmp_path / "set").mkdir()
    (tmp_path / "set" / "run-0001.xyz").touch()  # a set (a folder without runs is refused before the journal)
    assert main(["summary", str(tmp_path / "set"), "--journal", str(tmp_path / "nope.jsonl")]) == 2
    assert "no label journal there" in capsys.readouterr().err
