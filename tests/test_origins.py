"""What decides the outcome: the classifier, its baseline and permutation test, importances and the sentence.

Counts here are small to keep the tests fast (2 repeats of 5 folds, 24 permutations, 3 shuffles per coordinate);
production uses 5 × 5 folds, 200 permutations and 10 shuffles (core/origins.py, PRODUCTION)."""

from __future__ import annotations

import numpy as np
import pytest
from origins_sets import MONITORS, toy_set

from basinmark.core.origins import C_GRID, Settings, analyse, feature_matrix, make_classifier
from basinmark.core.origins_start import starting_conditions

FAST = Settings(n_splits=5, n_repeats=2, n_permutations=24, importance_repeats=3, seed=7)
#: where the test is not about the classifier's regularisation: a fixed C (no inner cross-validation) is ~20x
#: faster per fit
FIXED = dict(C=1.0)


@pytest.fixture(scope="module")
def toy():
    tset, outcome = toy_set(n=120, seed=1)
    return starting_conditions(tset, MONITORS), outcome


def test_the_deciding_coordinate_is_ranked_first_with_high_accuracy(toy):
    start, outcome = toy
    a = analyse(start, outcome, FAST)
    assert a.importance["coordinate"].iloc[0] == "dr_bc/dt [angstrom/fs]"
    assert a.accuracy > 0.95
    assert a.p_value < 0.05 and a.predictable
    assert a.p_value == pytest.approx(1 / 25)  # nothing shuffled beats it: the smallest p 24 permutations give
    assert "decided mostly by the rate of change of r_bc at t = 0" in a.sentence
    assert f"accuracy {a.accuracy:.2f} ± {a.accuracy_se:.2f}, baseline {a.baseline:.2f}" in a.sentence
    # velocities were estimated (an in-memory set carries no velocity column): said in the warnings
    assert any("estimated" in w for w in a.warnings)
    # the regularisation was chosen by inner cross-validation in each of the 2 × 5 training folds, and said
    assert len(a.chosen_C) == 10 and set(a.chosen_C) <= set(C_GRID)
    assert "inner 3-fold cross-validation" in a.regularisation() and a.regularisation() in a.notes


def test_a_model_that_keeps_no_coordinate_guesses_the_commonest_outcome():
    # the strongest L1 penalty zeroes every weight; the intercept must then carry the outcome shares (the log-odds
    # of 70:30 is 0.847; scikit-learn's liblinear penalises the intercept unless it is scaled out)
    rng = np.random.default_rng(0)
    X = rng.normal(0, 1, (200, 8))
    y = np.array(["alpha"] * 60 + ["beta"] * 140)
    model = make_classifier(Settings(C=C_GRID[0])).fit(X, y)
    assert not np.any(model[-1].coef_)
    assert model[-1].intercept_[0] == pytest.approx(np.log(140 / 60), abs=0.01)
    assert set(model.predict(X)) == {"beta"}


def test_shuffled_outcomes_are_not_predictable(toy):
    start, outcome = toy
    rng = np.random.default_rng(3)
    runs = list(outcome)
    shuffled = dict(zip(runs, rng.permutation([outcome[r] for r in runs])))
    a = analyse(start, shuffled, FAST)
    # not better than always guessing the commonest outcome: at most the top of the baseline's interval, and the
    # two intervals overlap.  (Held-out accuracy on outcomes that carry nothing often falls a little below the
    # baseline, a known bias of cross-validation on noise; here 0.43 against 0.53: where shuffled outcomes put
    # this classifier too, as the permutation scores show.)  The end-to-end check of a generated set asks for
    # the accuracy inside the baseline's interval (tests/test_origins_demo.py).
    lo, hi = a.baseline_interval
    assert a.accuracy <= hi and a.accuracy_interval[1] >= lo
    assert a.chance_range[0] <= a.accuracy <= a.chance_range[1]
    assert a.p_value > 0.05
    assert not a.predictable
    assert a.sentence.startswith("The outcome is not predictable from these starting conditions")


def _direct_nested_l1(seed: int):
    """The nested classifier built straight from scikit-learn: standardise, then an L1 logistic regression whose
    C an inner 3-fold stratified cross-validation picks from 0.01 to 10 in half decades by log-loss; the intercept
    (penalised by liblinear) scaled out of the penalty."""
    import sklearn
    from sklearn.linear_model import LogisticRegressionCV
    from sklearn.model_selection import StratifiedKFold
    from sklearn.pipeline import Pipeline
    from sklearn.preprocessing import StandardScaler

    major, minor = (int(p) for p in sklearn.__version__.split(".")[:2])
    l1 = ({"l1_ratios": (1.0,), "use_legacy_attributes": False} if (major, minor) >= (1, 8)
          else {"penalty": "l1"})
    inner = StratifiedKFold(3, shuffle=True, random_state=seed)
    return Pipeline([("s", StandardScaler()),
                     ("lr", LogisticRegressionCV(Cs=[0.01, 0.0316227766, 0.1, 0.316227766, 1.0, 3.16227766, 10.0],
                                                 cv=inner, scoring="neg_log_loss", solver="liblinear",
                                                 max_iter=1000, random_state=0, intercept_scaling=1000.0, **l1))])


def test_classifier_and_importance_agree_with_direct_scikit_learn_calls(toy):
    # reference: scikit-learn called directly on the same arrays, without our module in between: its own
    # cross_val_predict, permutation_test_score and permutation_importance with its own accuracy scorer, on the
    # same nested estimator (C chosen by inner cross-validation inside every training fold)
    from sklearn.inspection import permutation_importance
    from sklearn.model_selection import StratifiedKFold, cross_val_predict, permutation_test_score

    from threadpoolctl import threadpool_limits

    start, outcome = toy
    few = Settings(n_splits=5, n_repeats=2, n_permutations=9, importance_repeats=2, seed=5)
    a = analyse(start, outcome, few)
    X, _ = feature_matrix(start)
    y = np.array([outcome[r] for r in start.run_ids])
    np.testing.assert_array_equal(a.X, X)

    def direct():
        return _direct_nested_l1(few.seed)

    with threadpool_limits(1):  # as the module does: same numbers, faster on a busy machine
        accs, chosen = [], []
        for r in range(few.n_repeats):
            cv = StratifiedKFold(5, shuffle=True, random_state=few.seed + r)
            accs.append(np.mean(cross_val_predict(direct(), X, y, cv=cv) == y))
            chosen += [float(np.ravel(direct().fit(X[tr], y[tr])[-1].C_)[0]) for tr, _te in cv.split(X, y)]
        cv = StratifiedKFold(5, shuffle=True, random_state=few.seed)
        score, _scores, p = permutation_test_score(direct(), X, y, cv=cv, n_permutations=9, random_state=few.seed,
                                                   scoring="accuracy")
        drops = []
        for train, test in cv.split(X, y):
            model = direct().fit(X[train], y[train])
            drops.append(permutation_importance(model, X[test], y[test], n_repeats=2, scoring="accuracy",
                                                random_state=few.seed).importances)
    assert a.accuracy == pytest.approx(np.mean(accs), abs=1e-12)
    assert a.chosen_C == pytest.approx(chosen)
    assert a.permutation_score == pytest.approx(score) and a.p_value == pytest.approx(p)
    drops = np.concatenate(drops, axis=1)
    names = [f.name for f in a.features]
    for _, row in a.importance.iterrows():
        k = names.index(row["feature"])
        assert row["mean"] == pytest.approx(drops[k].mean(), abs=1e-12)
        assert row["sd"] == pytest.approx(drops[k].std(ddof=1), abs=1e-12)


def test_logistic_regression_matches_statsmodels_when_barely_regularised():
    # reference: statsmodels' maximum-likelihood Logit on the same standardised data (a fit we did not write)
    import statsmodels.api as sm

    rng = np.random.default_rng(2)
    X = rng.normal(0, 1, (300, 3)) * [1.0, 5.0, 0.2] + [0.0, 10.0, -1.0]
    logit = 0.8 * (X[:, 0]) - 0.3 * (X[:, 1] - 10) / 5
    y = np.where(rng.random(300) < 1 / (1 + np.exp(-logit)), "alpha", "beta")
    model = make_classifier(Settings(C=1e8, penalty="l2")).fit(X, y)
    Z = (X - X.mean(0)) / X.std(0)
    ref = sm.Logit((y == "beta").astype(float), sm.add_constant(Z)).fit(disp=0)
    lr = model[-1]
    np.testing.assert_allclose(lr.intercept_, ref.params[:1], rtol=1e-4, atol=1e-5)
    np.testing.assert_allclose(lr.coef_[0], ref.params[1:], rtol=1e-4, atol=1e-5)


def test_too_few_runs_are_said_and_fewer_than_the_folds_refused():
    tset, outcome = toy_set(n=40, seed=5)
    start = starting_conditions(tset, MONITORS)
    runs = list(outcome)
    alphas = [r for r in runs if outcome[r] == "alpha"]
    few = {r: ("alpha" if r in alphas[:7] else "beta") for r in runs if r in alphas[:7] or outcome[r] == "beta"}
    a = analyse(start, few, Settings(n_repeats=1, n_permutations=24, importance_repeats=1, **FIXED))
    assert a.classified
    assert a.warnings[0].startswith("Too few runs for the classifier to mean much: the rarest outcome has 7 runs")
    assert "common practice, no source" in a.warnings[0]
    fewer = {r: o for r, o in few.items() if o == "beta" or r in alphas[:3]}
    b = analyse(start, fewer, FAST)
    assert not b.classified and np.isnan(b.accuracy)
    assert "fewer than the 5 folds" in b.warnings[0] and "no classifier was made" in b.sentence


def test_runs_without_a_product_are_left_out_and_said(toy):
    start, outcome = toy
    marked = dict(outcome)
    for r in list(marked)[:6]:
        marked[r] = "recrossing"
    marked[list(marked)[6]] = "unfinished"
    quick = Settings(n_repeats=1, n_permutations=4, importance_repeats=1, **FIXED)
    a = analyse(start, marked, quick)
    assert len(a.run_ids) == len(outcome) - 7
    assert any("6 recrossing" in n and "1 unfinished" in n for n in a.notes)
    b = analyse(start, marked, quick, include=("recrossing",))
    assert set(b.classes) == {"alpha", "beta", "recrossing"}


def test_distributions_per_outcome(toy):
    start, outcome = toy
    a = analyse(start, outcome, Settings(n_repeats=1, n_permutations=9, importance_repeats=1, **FIXED))
    d = a.distributions.set_index(["coordinate", "outcome"])
    rates = start.table.set_index("run")["dr_bc/dt [angstrom/fs]"]
    alpha = rates[[r for r in a.run_ids if outcome[r] == "alpha"]]
    assert d.loc[("dr_bc/dt [angstrom/fs]", "alpha"), "runs"] == alpha.size
    assert d.loc[("dr_bc/dt [angstrom/fs]", "alpha"), "mean"] == pytest.approx(alpha.mean())
    assert d.loc[("dr_bc/dt [angstrom/fs]", "alpha"), "min"] > 0  # alpha is exactly the runs with a positive rate
    assert d.loc[("dr_bc/dt [angstrom/fs]", "beta"), "max"] < 0


def test_too_few_permutations_to_decide_are_said(toy):
    start, outcome = toy
    a = analyse(start, outcome, Settings(n_repeats=1, n_permutations=9, importance_repeats=1, **FIXED))
    assert a.p_value == pytest.approx(0.1) and not a.predictable
    assert a.sentence.startswith("Too few permutations (9) to tell whether the outcome is predictable")
    assert "the rate of change of r_bc" in a.sentence
    assert any("cannot give a p-value below 0.1" in w for w in a.warnings)
