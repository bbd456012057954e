"""What decides the outcome: from each run's starting conditions at the transition state to where it went.

:func:`analyse` takes the starting conditions (:mod:`basinmark.core.origins_start`) and each run's outcome and
answers three questions, each with its uncertainty:

1. *How does each coordinate differ between outcomes?*  Its distribution per outcome (count, mean, standard
   deviation, quartiles): :attr:`Analysis.distributions`.
2. *Is the outcome predictable from the starting conditions at all, and how well?*  A logistic regression on
   the standardised coordinates (scikit-learn) with an L1 penalty whose strength is chosen by an inner
   cross-validation inside every training fold (nested cross-validation: the held-out runs never help to
   choose it), scored by stratified k-fold cross-validation repeated with different splits.  Its accuracy is
   set against the majority-class baseline (always guessing the commonest outcome) with the Wilson interval of
   each, and a permutation test (``permutation_test_score``: the same nested cross-validation on outcomes
   shuffled many times) gives the p-value of "no better than chance".
3. *Which coordinate decides it?*  Permutation importance (``permutation_importance``) on each held-out fold:
   how much the held-out accuracy falls when one coordinate's values are shuffled; mean and standard deviation
   over folds and shuffles.

Angles that wrap (dihedrals, mode phases) enter the classifier as their cosine and sine, so that 179° and
-179° are neighbours; each is then a coordinate of its own in the importance ranking.

Counts used in production (defaults): 5 folds × 5 repeats, 200 permutations (the smallest p-value it can give
is 1/201 ≈ 0.005), 10 shuffles per coordinate and fold for the importance, 3 inner folds × 7 strengths.
Tests use fewer.

:func:`analyse` reports its progress (fits done of the total) and stops with :class:`AnalysisCancelled` soon
after ``cancelled()`` turns true (within one fit): the window runs it on a worker thread with a Cancel button.
"""

from __future__ import annotations

import inspect
from dataclasses import dataclass, field
from typing import Callable, Mapping, Sequence

import numpy as np
import pandas as pd

from basinmark.core.labels import FIXED_LABELS
from basinmark.core.origins_start import OriginsError, StartingConditions
from basinmark.core.stats import wilson_interval

#: fewer runs than this in the rarest outcome and the classifier's numbers mean little: a held-out fold then
#: holds one or two of its runs, and one run more or less right moves the accuracy by several points
#: (common practice, no source)
MIN_PER_OUTCOME = 10
#: the events-per-variable rule for logistic regression: at least 10 runs of the rarer outcome per coordinate,
#: else coefficients and importances are unstable (Peduzzi et al., J. Clin. Epidemiol. 49 (1996) 1373; from
#: memory).  Our classifier is regularised and scored on held-out runs, so the accuracy stays honest; the
#: warning is about the ranking.
EVENTS_PER_VARIABLE = 10
#: significance level of the permutation test (conventional)
ALPHA = 0.05

#: the inverse regularisation strengths C the inner cross-validation chooses from: 0.01 to 10 in half decades.
#: On standardised coordinates an L1 penalty at C = 0.01 keeps almost no coordinate and at 10 almost all of
#: them (measured on sets made by `make-demo --phase-decides`: the chosen C lay between 0.03 and 3).
C_GRID = tuple(float(c) for c in np.logspace(-2, 1, 7))

PRODUCTION = dict(n_splits=5, n_repeats=5, n_permutations=200, importance_repeats=10, inner_splits=3)


@dataclass(frozen=True)
class Settings:
    """How much work the analysis does; the defaults are the production counts."""

    n_splits: int = 5
    n_repeats: int = 5
    n_permutations: int = 200
    importance_repeats: int = 10
    seed: int = 0
    confidence: float = 0.95
    #: inverse regularisation strength of the logistic regression; None: chosen from :data:`C_GRID` by an inner
    #: cross-validation (``inner_splits`` stratified folds, held-out log-loss) inside every training fold
    C: float | None = None
    #: "l1" (default): most starting coordinates carry nothing about the outcome (with a mode file there are
    #: ~150 of them for a few hundred runs), and an L1 penalty sets their weights to zero where L2 only shrinks
    #: them.  Measured on five sets made by `make-demo --phase-decides` (57-195 runs × 154 coordinates),
    #: nested cross-validated accuracy: L2 0.87-0.94, L1 0.95-0.98.  "l2" is kept for comparisons.
    penalty: str = "l1"
    inner_splits: int = 3


class AnalysisCancelled(OriginsError):
    """The analysis was stopped on request before it ended."""

    def __init__(self) -> None:
        super().__init__("The analysis was cancelled before it ended.")

    def __reduce__(self):  # made again without arguments when it comes back from a worker process
        return (type(self), ())


class Work:
    """Counts the fits of an analysis against the total, reports them, and stops the analysis when asked.

    ``progress(done, total, stage)`` is called after every fit (from the thread the analysis runs on);
    ``cancelled()`` is asked after every fit and every scoring, and :class:`AnalysisCancelled` is raised when it
    says so."""

    def __init__(self, total: int = 0, progress: Callable[[int, int, str], None] | None = None,
                 cancelled: Callable[[], bool] | None = None) -> None:
        self.total = int(total)
        self.done = 0
        self.progress = progress
        self.cancelled = cancelled

    def check(self) -> None:
        if self.cancelled is not None and self.cancelled():
            raise AnalysisCancelled()

    def fitted(self, stage: str) -> None:
        self.done += 1
        if self.progress is not None:
            self.progress(self.done, max(self.total, self.done), stage)
        self.check()

    def scorer(self, on_score: Callable[[int], str] | None = None):
        """An accuracy scorer (the fraction of runs whose predicted outcome is right: scikit-learn's "accuracy",
        without its input checks, which cost more than the prediction here) that also counts and checks.
        ``on_score(k)`` names the stage of the k-th scoring (from 0) and counts it as a fit done."""
        calls = [0]

        def score(estimator, X, y) -> float:
            self.check()
            value = float(np.mean(estimator.predict(X) == y))
            if on_score is not None:
                self.fitted(on_score(calls[0]))
            calls[0] += 1
            return value

        return score


def work_total(s: "Settings") -> int:
    """Fits of one analysis: the repeated cross-validation, the permutation test (unshuffled first), the
    importance folds."""
    return s.n_repeats * s.n_splits + (s.n_permutations + 1) * s.n_splits + s.n_splits


@dataclass(frozen=True)
class Feature:
    """One column of the classifier's matrix: which coordinate it comes from and how a sentence names it."""

    name: str  # column name in the feature matrix
    coordinate: str  # column of the starting-conditions table
    phrase: str
    group: str


def need_sklearn():
    """Import scikit-learn, or say plainly what is missing."""
    try:
        import sklearn  # noqa: F401
    except ImportError as exc:  # pragma: no cover - it is a dependency; a broken install is said, not hidden
        raise OriginsError("the analysis of outcomes needs scikit-learn, which is not installed or cannot be "
                           f"imported ({exc}); install it with: python -m pip install scikit-learn") from None


def _penalty_args(cls, penalty: str, cv: bool) -> dict:
    """The penalty in the words of the installed scikit-learn: from 1.8 on as an L1 ratio (``penalty`` is
    deprecated there), before as ``penalty``."""
    params = inspect.signature(cls).parameters
    out: dict = {}
    if params["penalty"].default == "deprecated":
        ratio = 1.0 if penalty == "l1" else 0.0
        out.update({"l1_ratios": (ratio,)} if cv else {"l1_ratio": ratio})
    else:
        out["penalty"] = penalty
    if cv and "use_legacy_attributes" in params:
        out["use_legacy_attributes"] = False  # C_ as one number (the legacy array is deprecated)
    return out


def make_classifier(settings: Settings | None = None, n_classes: int = 2):
    """The classifier: standardised coordinates into a logistic regression (L1 by default) whose strength C is
    chosen by inner cross-validation in every fit (``settings.C`` None), else fixed; one-against-the-rest for
    three or more outcomes with L1 (the L1 solver fits two classes at a time)."""
    need_sklearn()
    from sklearn.linear_model import LogisticRegression, LogisticRegressionCV
    from sklearn.model_selection import StratifiedKFold
    from sklearn.pipeline import make_pipeline
    from sklearn.preprocessing import StandardScaler

    s = settings or Settings()
    if s.penalty not in ("l1", "l2"):
        raise OriginsError(f"unknown penalty {s.penalty!r}; choose l1 or l2")
    if s.penalty == "l1":
        # liblinear: the L1 solver that is fast on a few hundred runs (saga took ~10x longer, measured).  It
        # penalises the intercept like a weight; scaled by 1000 that penalty vanishes, so a model that keeps no
        # coordinate predicts the commonest outcome (at scikit-learn's scaling of 1 its intercept shrank to 0,
        # and it guessed the first outcome in alphabetical order whichever was commoner)
        fit = dict(solver="liblinear", max_iter=1000, random_state=0, intercept_scaling=1000.0)
    else:
        # tol tighter than scikit-learn's 1e-4: the fits are tiny, and the coefficients then agree with a
        # maximum-likelihood fit to ~1e-5 (tests/test_origins.py checks against statsmodels)
        fit = dict(tol=1e-7, max_iter=5000)
    if s.C is None:
        inner = StratifiedKFold(s.inner_splits, shuffle=True, random_state=s.seed)
        # chosen by held-out log-loss (a proper score): on outcomes that carry no information it prefers the
        # strongest regularisation (predicting the outcome shares), where accuracy's many ties pick at random
        model = LogisticRegressionCV(Cs=list(C_GRID), cv=inner, scoring="neg_log_loss", refit=True,
                                     **_penalty_args(LogisticRegressionCV, s.penalty, True), **fit)
    else:
        model = LogisticRegression(C=s.C, **_penalty_args(LogisticRegression, s.penalty, False), **fit)
    if n_classes > 2 and s.penalty == "l1":
        from sklearn.multiclass import OneVsRestClassifier

        model = OneVsRestClassifier(model)
    return make_pipeline(StandardScaler(), model)


def chosen_C(model) -> list[float]:
    """The strength C a fitted classifier of :func:`make_classifier` used (one per outcome when one against the
    rest)."""
    last = model[-1]
    parts = getattr(last, "estimators_", [last])
    return [float(np.ravel(p.C_ if hasattr(p, "C_") else p.C)[0]) for p in parts]


def feature_matrix(start: StartingConditions, columns: Sequence[str] | None = None
                   ) -> tuple[np.ndarray, list[Feature]]:
    """The starting conditions as the classifier sees them, one row per run: circular coordinates as cosine and
    sine, everything else as it stands."""
    coords = [c for c in start.coordinates if columns is None or c.column in columns]
    parts, feats = [], []
    for c in coords:
        v = start.table[c.column].to_numpy(dtype=float)
        if c.circular:
            r = np.radians(v)
            parts += [np.cos(r), np.sin(r)]
            feats += [Feature(f"cos {c.column}", c.column, f"{c.phrase} (its cosine)", c.group),
                      Feature(f"sin {c.column}", c.column, f"{c.phrase} (its sine)", c.group)]
        else:
            parts.append(v)
            feats.append(Feature(c.column, c.column, c.phrase, c.group))
    x = np.column_stack(parts) if parts else np.zeros((len(start.table), 0))
    return x, feats


@dataclass
class Analysis:
    """The answer of :func:`analyse`."""

    run_ids: list[str]
    y: np.ndarray  # outcome per run (strings)
    X: np.ndarray  # feature matrix (runs × features), unscaled
    features: list[Feature]
    classes: list[str]
    counts: dict[str, int]
    settings: Settings
    distributions: pd.DataFrame
    accuracy: float = float("nan")
    accuracy_se: float = float("nan")
    accuracy_interval: tuple[float, float] = (float("nan"), float("nan"))
    accuracy_repeats: np.ndarray = field(default_factory=lambda: np.zeros(0))
    majority: str = ""
    baseline: float = float("nan")
    baseline_interval: tuple[float, float] = (float("nan"), float("nan"))
    permutation_score: float = float("nan")
    permutation_scores: np.ndarray = field(default_factory=lambda: np.zeros(0))
    p_value: float = float("nan")
    importance: pd.DataFrame = field(default_factory=pd.DataFrame)
    sentence: str = ""
    warnings: list[str] = field(default_factory=list)
    notes: list[str] = field(default_factory=list)
    #: the strength C each fit of the repeated cross-validation chose (inner cross-validation), or the fixed one
    chosen_C: list[float] = field(default_factory=list)
    #: classifiers refitted on two features and their accuracy, by the pair (see :meth:`boundary`)
    boundaries: dict = field(default_factory=dict, repr=False)

    @property
    def classified(self) -> bool:
        """Whether the classifier ran (enough runs of at least two outcomes)."""
        return bool(np.isfinite(self.accuracy))

    @property
    def predictable(self) -> bool:
        """Better than chance by the permutation test and above the baseline's interval."""
        return self.classified and self.p_value <= ALPHA and self.accuracy_interval[0] > self.baseline

    @property
    def chance_range(self) -> tuple[float, float]:
        """The middle 95 % of the accuracies this classifier and these folds reach on shuffled outcomes: what
        chance looks like here.  With many coordinates it can lie below the majority baseline (held-out runs
        of noise are often guessed as the rarer outcome)."""
        if not len(self.permutation_scores):
            return float("nan"), float("nan")
        lo, hi = np.percentile(self.permutation_scores, [2.5, 97.5])
        return float(lo), float(hi)

    def ranked(self) -> list[str]:
        """Feature names from most to least important (empty when the classifier did not run)."""
        return list(self.importance["feature"]) if len(self.importance) else []

    def top_two(self) -> list[str]:
        """The two most informative features (the axes of the picture)."""
        ranked = self.ranked()
        if len(ranked) >= 2:
            return ranked[:2]
        return [f.name for f in self.features[:2]]

    def feature(self, name: str) -> Feature:
        return next(f for f in self.features if f.name == name)

    def column(self, name: str) -> np.ndarray:
        return self.X[:, [f.name for f in self.features].index(name)]

    def boundary_model(self, names: Sequence[str]):
        """The classifier refitted on the features ``names`` alone (for drawing its boundary on their plane)."""
        return self.boundary(names)[0]

    def boundary(self, names: Sequence[str]):
        """``(model, accuracy)``: the classifier refitted on the features ``names`` alone and its cross-validated
        accuracy (:func:`boundary_accuracy`); computed once per pair (the analysis' worker computes the default
        pair, so the window draws it without fitting on its own thread)."""
        key = tuple(names)
        if key not in self.boundaries:
            from threadpoolctl import threadpool_limits

            idx = [[f.name for f in self.features].index(n) for n in names]
            with threadpool_limits(1):
                model = make_classifier(self.settings, len(self.classes)).fit(self.X[:, idx], self.y)
            self.boundaries[key] = (model, boundary_accuracy(self, names))
        return self.boundaries[key]

    def regularisation(self) -> str:
        """How the classifier was regularised, in a sentence."""
        s = self.settings
        kind = "L1 (lasso)" if s.penalty == "l1" else "L2 (ridge)"
        if s.C is not None:
            return f"Logistic regression with a fixed {kind} penalty, C = {s.C:g}."
        text = (f"Logistic regression with an {kind} penalty whose strength C was chosen in every training fold by "
                f"an inner {s.inner_splits}-fold cross-validation (from {C_GRID[0]:g} to {C_GRID[-1]:g}; smaller "
                "keeps fewer coordinates)")
        if not self.chosen_C:
            return text + "."
        c = np.array(self.chosen_C)
        text += f": median C = {np.median(c):.2g} (range {c.min():.2g} to {c.max():.2g} over {len(c)} fits)"
        edge = np.mean(np.isclose(c, C_GRID[0]) | np.isclose(c, C_GRID[-1]))
        if edge > 0.5:
            text += "; mostly at an end of the range, so a wider range might fit better"
        return text + "."


# --- pieces -----------------------------------------------------------------------------------------------

def distributions(start: StartingConditions, outcome: Mapping[str, str], run_ids: Sequence[str]) -> pd.DataFrame:
    """Per coordinate and outcome: runs, mean, standard deviation, quartiles, range."""
    table = start.table.set_index("run").loc[list(run_ids)]
    labels = pd.Series([outcome[r] for r in run_ids], index=table.index)
    rows = []
    for c in start.coordinates:
        values = table[c.column].astype(float)
        for label in sorted(set(labels)):
            v = values[labels == label].to_numpy()
            v = v[np.isfinite(v)]
            q = np.percentile(v, [0, 25, 50, 75, 100]) if v.size else [np.nan] * 5
            rows.append({"coordinate": c.column, "outcome": label, "runs": int(v.size),
                         "mean": float(np.mean(v)) if v.size else np.nan,
                         "sd": float(np.std(v, ddof=1)) if v.size > 1 else np.nan,
                         "min": q[0], "q25": q[1], "median": q[2], "q75": q[3], "max": q[4]})
    return pd.DataFrame(rows, columns=["coordinate", "outcome", "runs", "mean", "sd", "min", "q25", "median",
                                       "q75", "max"])


def cv_accuracy(X: np.ndarray, y: np.ndarray, settings: Settings, work: Work | None = None,
                chosen: list[float] | None = None) -> np.ndarray:
    """Accuracy of held-out predictions, pooled over the folds of each repeat: one value per repeat.

    Fold by fold as ``cross_val_predict`` does (a fresh classifier fitted on each training fold predicts its
    held-out fold), so that every fit can be counted and the C it chose kept in ``chosen``."""
    from sklearn.model_selection import StratifiedKFold

    work = work or Work()
    n_classes = len(np.unique(y))
    out = []
    for r in range(settings.n_repeats):
        cv = StratifiedKFold(settings.n_splits, shuffle=True, random_state=settings.seed + r)
        pred = np.empty_like(y)
        for train, test in cv.split(X, y):
            model = make_classifier(settings, n_classes).fit(X[train], y[train])
            pred[test] = model.predict(X[test])
            if chosen is not None:
                chosen.extend(chosen_C(model))
            work.fitted(f"cross-validation (repeat {r + 1} of {settings.n_repeats})")
        out.append(float(np.mean(pred == y)))
    return np.array(out)


def permutation_test(X: np.ndarray, y: np.ndarray, settings: Settings, work: Work | None = None
                     ) -> tuple[float, np.ndarray, float]:
    """scikit-learn's ``permutation_test_score`` with our classifier and folds: (score, scores, p-value)."""
    from sklearn.model_selection import StratifiedKFold, permutation_test_score

    work = work or Work()
    k, n = settings.n_splits, settings.n_permutations

    def stage(call: int) -> str:
        shuffle = call // k
        return "permutation test (unshuffled)" if shuffle == 0 else f"permutation test (shuffle {shuffle} of {n})"

    cv = StratifiedKFold(k, shuffle=True, random_state=settings.seed)
    score, scores, p = permutation_test_score(make_classifier(settings, len(np.unique(y))), X, y, cv=cv,
                                              scoring=work.scorer(stage), n_permutations=n,
                                              random_state=settings.seed)
    return float(score), np.asarray(scores), float(p)


def fold_importances(X: np.ndarray, y: np.ndarray, settings: Settings, work: Work | None = None) -> np.ndarray:
    """``permutation_importance`` on each held-out fold: array (features, folds × shuffles) of accuracy drops."""
    from sklearn.inspection import permutation_importance
    from sklearn.model_selection import StratifiedKFold

    work = work or Work()
    cv = StratifiedKFold(settings.n_splits, shuffle=True, random_state=settings.seed)
    parts = []
    for fold, (train, test) in enumerate(cv.split(X, y)):
        model = make_classifier(settings, len(np.unique(y))).fit(X[train], y[train])
        res = permutation_importance(model, X[test], y[test], scoring=work.scorer(),
                                     n_repeats=settings.importance_repeats, random_state=settings.seed)
        parts.append(res.importances)
        work.fitted(f"importance (fold {fold + 1} of {settings.n_splits})")
    return np.concatenate(parts, axis=1)


def _fmt(x: float) -> str:
    return f"{x:.2f}"


def plain_sentence(a: Analysis) -> str:
    """The result in one or two plain sentences."""
    if not a.classified:
        return "The outcome was not analysed: " + (a.warnings[0] if a.warnings else "too few runs.")
    numbers = (f"cross-validated accuracy {_fmt(a.accuracy)} ± {_fmt(a.accuracy_se)}, baseline {_fmt(a.baseline)} "
               f"(always {a.majority}), permutation p = {a.p_value:.3g}")
    smallest_p = 1.0 / (len(a.permutation_scores) + 1)
    if smallest_p > ALPHA and a.p_value <= smallest_p and len(a.importance):
        return (f"Too few permutations ({len(a.permutation_scores)}) to tell whether the outcome is predictable: "
                f"the smallest p-value they can give is {smallest_p:.2g}. The most important coordinate is "
                f"{a.importance.iloc[0]['phrase']} ({numbers}).")
    if not a.predictable:
        return (f"The outcome is not predictable from these starting conditions: the classifier does no better than "
                f"always guessing the commonest outcome ({numbers}).")
    imp = a.importance
    first = imp.iloc[0]
    text = f"The outcome is decided mostly by {first['phrase']} ({numbers})."
    if len(imp) > 1:
        second = imp.iloc[1]
        if first["mean"] - 2 * first["sd"] <= second["mean"]:
            text += (f" {second['phrase'][0].upper()}{second['phrase'][1:]} matters about as much: their importances "
                     f"overlap ({_fmt(first['mean'])} ± {_fmt(first['sd'])} against {_fmt(second['mean'])} ± "
                     f"{_fmt(second['sd'])}).")
    return text


# --- the whole analysis -----------------------------------------------------------------------------------

def select_runs(start: StartingConditions, outcome: Mapping[str, str], include: Sequence[str] | None = None
                ) -> tuple[list[str], list[str]]:
    """The runs to analyse (those with a product label, or one of ``include``) and notes on the ones left out."""
    left: dict[str, int] = {}
    keep = []
    for r in start.run_ids:
        label = outcome.get(r)
        label = label if isinstance(label, str) and label else "no label"
        counted = label not in FIXED_LABELS and label != "no label"
        if counted or (include is not None and label in include):
            keep.append(r)
        else:
            left[label] = left.get(label, 0) + 1
    notes = []
    if left:
        what = ", ".join(f"{n} {k}" for k, n in sorted(left.items()))
        notes.append(f"Runs without a product are left out ({what}); only the products are compared"
                     + ("" if include else " (include recrossing runs as an outcome of their own if they matter)"))
    return keep, notes


def analyse(start: StartingConditions, outcome: Mapping[str, str], settings: Settings | None = None,
            include: Sequence[str] | None = None, columns: Sequence[str] | None = None,
            progress: Callable[[int, int, str], None] | None = None,
            cancelled: Callable[[], bool] | None = None) -> Analysis:
    """What decides the outcome of the runs of ``start``; ``outcome`` maps run ids to final labels.

    Runs labeled with a product are compared (plus labels in ``include``, e.g. ``("recrossing",)``);
    ``columns`` limits the coordinates (default: all).  ``progress(done, total, stage)`` hears of every fit;
    when ``cancelled()`` turns true the analysis stops with :class:`AnalysisCancelled` (see :class:`Work`)."""
    need_sklearn()
    from threadpoolctl import threadpool_limits

    s = settings or Settings()
    work = Work(work_total(s), progress, cancelled)
    # one BLAS/OpenMP thread: the matrices are tiny, and several threads per fit made each fit ~7x slower on
    # a busy two-core machine (measured: 160 ms against 22 ms for 120 runs × 6 coordinates)
    with threadpool_limits(1):
        a = _analyse(start, outcome, s, include, columns, work)
        if a.classified and len(a.features) >= 2:
            a.boundary(a.top_two())  # the picture's default plane, fitted here rather than by whoever draws it
        return a


def _analyse(start, outcome, s, include, columns, work: Work) -> Analysis:
    run_ids, notes = select_runs(start, outcome, include)
    index = {r: i for i, r in enumerate(start.run_ids)}
    X_all, feats = feature_matrix(start, columns)
    X = X_all[[index[r] for r in run_ids]] if run_ids else X_all[:0]
    keep_rows = np.all(np.isfinite(X), axis=1)
    if not keep_rows.all():
        dropped = [r for r, k in zip(run_ids, keep_rows) if not k]
        notes.append(f"{len(dropped)} run(s) left out for an undefined starting coordinate (e.g. a dihedral of "
                     f"collinear atoms): {', '.join(dropped[:5])}")
        run_ids = [r for r, k in zip(run_ids, keep_rows) if k]
        X = X[keep_rows]
    varies = np.ptp(X, axis=0) > 0 if len(X) else np.zeros(X.shape[1], bool)
    if not varies.all():
        notes.append("Coordinates that are the same in every run carry no information and are left out: "
                     + ", ".join(f.name for f, v in zip(feats, varies) if not v))
        feats = [f for f, v in zip(feats, varies) if v]
        X = X[:, varies]
    y = np.array([outcome[r] for r in run_ids], dtype=object).astype(str)
    classes, counts_arr = np.unique(y, return_counts=True)
    counts = {str(c): int(n) for c, n in zip(classes, counts_arr)}
    dist = distributions(start, outcome, run_ids)
    a = Analysis(run_ids, y, X, feats, [str(c) for c in classes], counts, s, dist,
                 warnings=list(start.warnings), notes=list(start.notes) + notes)
    n = len(y)
    if n:
        a.majority = str(classes[int(np.argmax(counts_arr))])
        k = int(np.max(counts_arr))
        a.baseline = k / n
        a.baseline_interval = wilson_interval(k, n, s.confidence)
    smallest = int(counts_arr.min()) if len(counts_arr) else 0
    refused = ""
    if len(classes) < 2:
        refused = (f"Only {len(classes)} outcome among the {n} runs compared; there is nothing to tell apart, so no "
                   "classifier was made.")
    elif not feats:
        refused = "No starting coordinate varies between the runs; no classifier was made."
    elif smallest < s.n_splits:
        refused = (f"Too few runs for the classifier to mean anything: the rarest outcome has {smallest} run(s), "
                   f"fewer than the {s.n_splits} folds of the cross-validation, so no classifier was made.")
    if refused:
        a.warnings.insert(0, refused)
        a.sentence = plain_sentence(a)
        return a
    if smallest < MIN_PER_OUTCOME:
        a.warnings.insert(0, f"Too few runs for the classifier to mean much: the rarest outcome has {smallest} runs "
                             f"(fewer than {MIN_PER_OUTCOME}, common practice, no source); accuracy, p-value and "
                             "ranking below are very uncertain.")
    elif smallest < EVENTS_PER_VARIABLE * len(feats):
        a.notes.append(f"{smallest} runs of the rarest outcome for {len(feats)} coordinates: fewer than "
                       f"{EVENTS_PER_VARIABLE} per coordinate (Peduzzi et al. 1996), so the ranking of coordinates "
                       "of similar importance is unstable; the accuracy is still measured on held-out runs.")
    chosen: list[float] = []
    reps = cv_accuracy(X, y, s, work, chosen)
    a.chosen_C = chosen
    a.accuracy_repeats = reps
    a.accuracy = float(np.mean(reps))
    # the uncertainty from having n runs (binomial standard error); the spread between repeated splits is
    # usually smaller and is kept in accuracy_repeats
    a.accuracy_se = float(max(np.sqrt(a.accuracy * (1 - a.accuracy) / n), np.std(reps, ddof=1) if len(reps) > 1
                              else 0.0))
    a.accuracy_interval = wilson_interval(int(round(a.accuracy * n)), n, s.confidence)
    a.permutation_score, a.permutation_scores, a.p_value = permutation_test(X, y, s, work)
    if 1.0 / (s.n_permutations + 1) > ALPHA:
        a.warnings.append(f"{s.n_permutations} permutations cannot give a p-value below "
                          f"{1.0 / (s.n_permutations + 1):.2g}; use at least {int(np.ceil(1 / ALPHA)) - 1} (200 by "
                          "default) for the test to be able to say the outcome is predictable.")
    imp = fold_importances(X, y, s, work)
    table = pd.DataFrame({"feature": [f.name for f in feats], "coordinate": [f.coordinate for f in feats],
                          "phrase": [f.phrase for f in feats], "group": [f.group for f in feats],
                          "mean": imp.mean(axis=1), "sd": imp.std(axis=1, ddof=1) if imp.shape[1] > 1 else 0.0})
    table = table.sort_values("mean", ascending=False, kind="stable").reset_index(drop=True)
    table.insert(0, "rank", np.arange(1, len(table) + 1))
    a.importance = table
    a.notes.append(a.regularisation())
    a.notes.append("Importance is the fall in held-out accuracy when one coordinate's values are shuffled; "
                   "coordinates that carry the same information (a monitor and a mode along it) share it, so each "
                   "may look less important than the two together.")
    a.sentence = plain_sentence(a)
    return a


def boundary_accuracy(a: Analysis, names: Sequence[str]) -> float:
    """Cross-validated accuracy (one repeat of the folds) of the classifier on the features ``names`` alone: how
    much of the answer the two-coordinate picture shows."""
    from sklearn.model_selection import StratifiedKFold, cross_val_predict
    from threadpoolctl import threadpool_limits

    if not a.classified:
        return float("nan")
    idx = [[f.name for f in a.features].index(n) for n in names]
    cv = StratifiedKFold(a.settings.n_splits, shuffle=True, random_state=a.settings.seed)
    with threadpool_limits(1):
        pred = cross_val_predict(make_classifier(a.settings, len(a.classes)), a.X[:, idx], a.y, cv=cv)
    return float(np.mean(pred == a.y))
