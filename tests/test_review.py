"""Review of two labelers: kappa against reference libraries and worked examples, bands, queue, report."""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest
from hypothesis import assume, given
from hypothesis import strategies as st
from sklearn.metrics import cohen_kappa_score
from statsmodels.stats.inter_rater import cohens_kappa

from basinmark.core.journal import LabelJournal
from basinmark.core.review import (compare_journals, compare_labelers, compare_labels, kappa_from_table,
                                   landis_koch_band, render_markdown)

H = "ab" * 32
LABELS = ["alpha", "beta", "recrossing", "unfinished"]


@pytest.mark.filterwarnings("ignore::UserWarning", "ignore::RuntimeWarning")  # the reference libraries' own
@given(st.lists(st.tuples(st.sampled_from(LABELS), st.sampled_from(LABELS)), min_size=1, max_size=80))
def test_kappa_equals_sklearn_and_se_equals_statsmodels(pairs):
    a = pd.Series([p[0] for p in pairs], index=[f"r{i}" for i in range(len(pairs))])
    b = pd.Series([p[1] for p in pairs], index=a.index)
    r = compare_labels(a, b)
    # reference library: scikit-learn's Cohen's kappa
    with np.errstate(all="ignore"):
        ref = cohen_kappa_score(a.to_numpy(), b.to_numpy())
    if math.isnan(r.kappa):
        assert math.isnan(ref) or r.chance_agreement == pytest.approx(1.0)
        return
    if math.isnan(ref):
        # scikit-learn calls kappa undefined when the two labelers share at most one label;
        # the formula still gives a value there, which statsmodels (below) checks
        assert len(set(a) & set(b)) <= 1
    else:
        assert r.kappa == pytest.approx(ref, abs=1e-12)
    assert r.agreement == pytest.approx(float(np.mean(a.to_numpy() == b.to_numpy())))
    assert int(r.confusion.to_numpy().sum()) == len(pairs)
    assume(r.n >= 2)
    # reference library: statsmodels' cohens_kappa gives the same large-sample standard error
    sm = cohens_kappa(r.confusion.to_numpy())
    assert r.kappa == pytest.approx(sm.kappa, abs=1e-12)
    # compared as variances: where the exact variance is 0, rounding can take statsmodels' value just
    # below zero (its SE is then NaN) while ours is clipped at 0
    assert r.kappa_se ** 2 == pytest.approx(max(sm.var_kappa, 0.0), rel=1e-9, abs=1e-12)
    lo, hi = r.ci
    assert lo <= r.kappa <= hi and -1 <= lo and hi <= 1


def test_worked_2x2_examples():
    # Worked example of the Wikipedia article "Cohen's kappa" (from memory): 50 applications,
    # both yes 20, A yes/B no 5, A no/B yes 10, both no 15 -> p_o 0.70, p_e 0.50, kappa 0.40.
    k, se, po, pe = kappa_from_table([[20, 5], [10, 15]])
    assert (po, pe) == (pytest.approx(0.70), pytest.approx(0.50)) and k == pytest.approx(0.40)
    # Same article (from memory): 45 / 15 / 25 / 15 of 100 -> kappa 0.1304
    k2, *_ = kappa_from_table([[45, 15], [25, 15]])
    assert k2 == pytest.approx(0.1304, abs=5e-5)
    # reference library for the standard error of the first table
    assert se == pytest.approx(cohens_kappa(np.array([[20, 5], [10, 15]])).std_kappa, rel=1e-12)


@pytest.mark.parametrize("kappa,band", [
    # Landis & Koch, Biometrics 33 (1977) 159, Table: <0 poor, 0-0.20 slight, 0.21-0.40 fair,
    # 0.41-0.60 moderate, 0.61-0.80 substantial, 0.81-1.00 almost perfect
    (-0.1, "poor"), (0.0, "slight"), (0.20, "slight"), (0.21, "fair"), (0.40, "fair"), (0.41, "moderate"),
    (0.60, "moderate"), (0.61, "substantial"), (0.80, "substantial"), (0.81, "almost perfect"),
    (1.0, "almost perfect"), (float("nan"), ""),
])
def test_landis_koch_bands(kappa, band):
    assert landis_koch_band(kappa) == band


def test_disagreements_only_common_runs_and_warnings():
    a = pd.DataFrame({"run": ["r1", "r2", "r3", "r4"], "label": ["alpha", "beta", "alpha", "alpha"],
                      "labeler": "ana", "reason": ["", "late bond", "", ""]})
    b = pd.Series({"r1": "alpha", "r2": "alpha", "r3": "alpha", "r9": "beta"})
    r = compare_labels(a, b, name_a="ana", name_b="ben")
    assert r.n == 3 and r.only_a == ["r4"] and r.only_b == ["r9"]
    assert list(r.disagreements.columns) == ["run", "label_a", "labeler_a", "reason_a", "label_b", "labeler_b",
                                             "reason_b"]
    row = r.disagreements.iloc[0]
    assert (row["run"], row["label_a"], row["labeler_a"], row["reason_a"], row["label_b"], row["labeler_b"]) == \
        ("r2", "beta", "ana", "late bond", "alpha", "ben")
    assert r.confusion.loc["beta", "alpha"] == 1 and r.confusion.loc["alpha", "alpha"] == 2
    assert any("only 3 runs" in w for w in r.warnings)
    assert any("left out" in w for w in r.warnings)
    one_sided = compare_labels(pd.Series({"r1": "alpha", "r2": "beta"}), pd.Series({"r1": "alpha", "r2": "alpha"}),
                               name_b="ben")
    assert one_sided.kappa == 0.0 and any("ben gave every compared run the same label" in w
                                          for w in one_sided.warnings)
    same = compare_labels(pd.Series({"r1": "alpha"}), pd.Series({"r1": "alpha"}))
    assert math.isnan(same.kappa) and any("undefined" in w for w in same.warnings)
    none = compare_labels(pd.Series({"r1": "alpha"}), pd.Series({"r2": "alpha"}))
    assert none.n == 0 and any("nothing to compare" in w for w in none.warnings)


def test_review_from_journals_adjudicate_and_report(tmp_path):
    rng = np.random.default_rng(7)
    runs = [f"run{i:03d}" for i in range(60)]
    truth = rng.choice(["alpha", "beta", "recrossing"], size=len(runs), p=[0.6, 0.3, 0.1])
    path = tmp_path / "basinmark-labels.jsonl"
    with LabelJournal.open(path, labeler="ana") as j:
        j.record_batch([{"run_id": r, "label": t, "content_hash": H} for r, t in zip(runs, truth)],
                       rules_hash="0f" * 32)
        for r, t in zip(runs[:40], truth[:40]):
            flip = rng.random() < 0.2
            j.record(r, "beta" if flip and t != "beta" else t, content_hash=H, reason="flip" if flip else "")
        for r, t in zip(runs[:30], truth[:30]):
            j.record(r, t, content_hash=H, labeler="ben")
        rv = compare_labelers(j, "auto", "hand")
        assert rv.n == 40
        rv2 = compare_labelers(j, "ana", "ben")
        assert rv2.n == 30
        with pytest.raises(ValueError, match="no labeler"):
            compare_labelers(j, "ana", "nobody")
        for d in rv.disagreements.itertuples():
            j.adjudicate(d.run, d.label_a, content_hash=H, label_a=d.label_a, label_b=d.label_b, reviewer="chief",
                         reason="checked the bond lengths")
        done = j.review_complete(reviewer="chief", summary=rv.summary())
        assert done["summary"]["runs_compared"] == 40
    md = render_markdown(rv)
    assert "Cohen's kappa" in md and "Landis & Koch band" in md and "## Disagreements" in md
    assert md.count("| run | label_a |") == (1 if len(rv.disagreements) else 0)
    # two journal files
    other = tmp_path / "other" / "basinmark-labels.jsonl"
    other.parent.mkdir()
    with LabelJournal.open(other, labeler="ben") as j:
        j.record_batch([{"run_id": r, "label": t, "content_hash": H} for r, t in zip(runs, truth)],
                       source="hand")
    both = compare_journals(path, other)
    assert both.n == 60 and both.agreement == 1.0 and both.band == "almost perfect"


def test_current_classification_as_a_label_source(tmp_path):
    from basinmark.core.review import current_auto_labels

    cls = pd.DataFrame({"run": ["r1", "r2", "r3", "r4"], "outcome": ["alpha", "beta", "alpha", "recrossing"],
                        "flags": ["", "late_commit", "", ""]})
    cur = current_auto_labels(cls)
    assert list(cur.index) == ["r1", "r2", "r3", "r4"] and cur.at["r2", "reason"] == "flags: late_commit"
    with LabelJournal.open(tmp_path / "j.jsonl", labeler="ann") as j:
        for run, lab in (("r1", "alpha"), ("r2", "alpha"), ("r3", "alpha"), ("r4", "recrossing")):
            j.record(run, lab, content_hash=H)
        r = compare_labelers(j, "current", "ann", current=cur)
        ref = cohen_kappa_score(["alpha", "beta", "alpha", "recrossing"], ["alpha", "alpha", "alpha", "recrossing"])
        assert r.n == 4 and r.kappa == pytest.approx(ref, abs=1e-12)  # scikit-learn reference
        with pytest.raises(ValueError, match="rules file"):
            compare_labelers(j, "current", "ann")  # no classification given
        j.record("r1", "beta", content_hash=H, labeler="current")
        with pytest.raises(ValueError, match="ambiguous"):
            compare_labelers(j, "current", "ann", current=cur)
