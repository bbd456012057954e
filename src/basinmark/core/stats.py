"""Counting outcomes honestly: proportions with intervals, product ratios, TST comparison.

Everything here is plain Python + numpy; scipy is not needed at run time (it
is used in the tests as a reference library).  The few special functions
needed (normal quantile, regularized incomplete beta and its inverse) are
written out below with their methods cited.

Conventions:

* ``confidence`` is the two-sided coverage, e.g. 0.95;
* a proportion interval for ``k`` of ``n`` is ``(lo, hi)`` within [0, 1];
  with ``n = 0`` nothing is known and the interval is the whole of [0, 1];
* ΔΔG‡ is ``G‡(b) − G‡(a)``: positive when channel ``a`` has the lower barrier,
  so that ``tst_ratio(ddg) = k_a / k_b > 1``.
"""

from __future__ import annotations

import math
from collections import Counter
from typing import Iterable, Mapping, Sequence

import numpy as np
import pandas as pd

from basinmark.core.cells import label_texts

from basinmark.core.units import convert_energy

#: molar gas constant R = N_A·k_B in joule per mole per kelvin (CODATA 2018: 8.314462618..., exact since the
#: 2019 SI redefinition fixed N_A = 6.02214076e23 mol⁻¹ and k_B = 1.380649e-23 J K⁻¹)
GAS_CONSTANT_SI = 6.02214076e23 * 1.380649e-23

#: labels that carry no product information (fixed outcome names of the journal)
NON_PRODUCT_LABELS = ("recrossing", "unfinished", "ambiguous", "excluded")

METHODS = ("wilson", "exact")

# Thresholds of the reliability warnings.  All are rules of thumb:
MIN_REACTIVE_RUNS = 30  # common practice, no source
MIN_MINOR_PRODUCT_RUNS = 5  # common practice, no source (cf. the n·p ≥ 5 rule for normal approximations)
MAX_UNFINISHED_FRACTION = 0.10  # common practice, no source


# --------------------------------------------------------------------------------------
# special functions
# --------------------------------------------------------------------------------------

# Rational approximation of the normal quantile by P. J. Acklam (2003, "An algorithm
# for computing the inverse normal cumulative distribution function"), relative error
# about 1e-9, refined below by one Halley step on math.erfc to full double precision.
_A = (-3.969683028665376e01, 2.209460984245205e02, -2.759285104469687e02,
      1.383577518672690e02, -3.066479806614716e01, 2.506628277459239e00)
_B = (-5.447609879822406e01, 1.615858368580409e02, -1.556989798598866e02,
      6.680131188771972e01, -1.328068155288572e01)
_C = (-7.784894002430293e-03, -3.223964580411365e-01, -2.400758277161838e00,
      -2.549732539343734e00, 4.374664141464968e00, 2.938163982698783e00)
_D = (7.784695709041462e-03, 3.224671290700398e-01, 2.445134137142996e00, 3.754408661907416e00)
_P_LOW = 0.02425


def _acklam(p: float) -> float:
    if p < _P_LOW:
        q = math.sqrt(-2.0 * math.log(p))
        return ((((((_C[0] * q + _C[1]) * q + _C[2]) * q + _C[3]) * q + _C[4]) * q + _C[5])
                / ((((_D[0] * q + _D[1]) * q + _D[2]) * q + _D[3]) * q + 1.0))
    if p > 1.0 - _P_LOW:
        return -_acklam(1.0 - p)
    q = p - 0.5
    r = q * q
    return ((((((_A[0] * r + _A[1]) * r + _A[2]) * r + _A[3]) * r + _A[4]) * r + _A[5]) * q
            / (((((_B[0] * r + _B[1]) * r + _B[2]) * r + _B[3]) * r + _B[4]) * r + 1.0))


def norm_ppf(p: float) -> float:
    """Quantile of the standard normal distribution (inverse CDF) at ``p`` in (0, 1)."""
    p = float(p)
    if not 0.0 < p < 1.0:
        if p == 0.0:
            return -math.inf
        if p == 1.0:
            return math.inf
        raise ValueError(f"a probability must lie in [0, 1], got {p}")
    if p > 0.5:  # work in the lower tail, where p itself carries full precision
        return -norm_ppf(1.0 - p)
    x = _acklam(p)
    # Halley step on F(x) - p with F(x) = erfc(-x/√2)/2 (Acklam's suggested refinement)
    e = 0.5 * math.erfc(-x / math.sqrt(2.0)) - p
    u = e * math.sqrt(2.0 * math.pi) * math.exp(0.5 * x * x)
    return x - u / (1.0 + 0.5 * x * u)


def z_value(confidence: float) -> float:
    """Two-sided normal critical value: z with P(|Z| < z) = confidence."""
    _check_confidence(confidence)
    return norm_ppf(0.5 + 0.5 * confidence)


def _betacf(a: float, b: float, x: float) -> float:
    # Continued fraction for the incomplete beta function, evaluated with the modified
    # Lentz method (Press et al., Numerical Recipes, 3rd ed., §6.4, "betacf").
    tiny = 1e-300
    qab, qap, qam = a + b, a + 1.0, a - 1.0
    c = 1.0
    d = 1.0 - qab * x / qap
    d = 1.0 / (d if abs(d) > tiny else tiny)
    h = d
    for m in range(1, 10_000):
        m2 = 2 * m
        aa = m * (b - m) * x / ((qam + m2) * (a + m2))
        d = 1.0 + aa * d
        d = 1.0 / (d if abs(d) > tiny else tiny)
        c = 1.0 + aa / c
        c = c if abs(c) > tiny else tiny
        h *= d * c
        aa = -(a + m) * (qab + m) * x / ((a + m2) * (qap + m2))
        d = 1.0 + aa * d
        d = 1.0 / (d if abs(d) > tiny else tiny)
        c = 1.0 + aa / c
        c = c if abs(c) > tiny else tiny
        step = d * c
        h *= step
        if abs(step - 1.0) < 1e-15:
            return h
    raise ArithmeticError(f"incomplete beta continued fraction did not converge (a={a}, b={b}, x={x})")


def _log_beta(a: float, b: float) -> float:
    return math.lgamma(a) + math.lgamma(b) - math.lgamma(a + b)


def betainc(a: float, b: float, x: float) -> float:
    """Regularized incomplete beta function I_x(a, b) for a, b > 0 and x in [0, 1]."""
    if x <= 0.0:
        return 0.0
    if x >= 1.0:
        return 1.0
    front = math.exp(a * math.log(x) + b * math.log1p(-x) - _log_beta(a, b))
    # the continued fraction converges fast for x < (a+1)/(a+b+2); else use the symmetry
    # I_x(a, b) = 1 - I_{1-x}(b, a)  (Numerical Recipes §6.4)
    if x < (a + 1.0) / (a + b + 2.0):
        return front * _betacf(a, b, x) / a
    return 1.0 - front * _betacf(b, a, 1.0 - x) / b


def beta_ppf(q: float, a: float, b: float, start: float | None = None) -> float:
    """Quantile of the Beta(a, b) distribution: x with I_x(a, b) = q.

    Safeguarded Newton iteration (the beta density is the derivative) inside a
    bisection bracket, so it always converges; ~10 steps for double precision,
    fewer from a good ``start`` in (0, 1) (default: the mean a/(a+b)).
    """
    if not 0.0 <= q <= 1.0:
        raise ValueError(f"a probability must lie in [0, 1], got {q}")
    if q == 0.0:
        return 0.0
    if q == 1.0:
        return 1.0
    lo, hi = 0.0, 1.0
    log_b = _log_beta(a, b)
    x = start if start is not None and 0.0 < start < 1.0 else a / (a + b)
    for _ in range(200):
        f = betainc(a, b, x) - q
        if f > 0.0:
            hi = x
        else:
            lo = x
        density = math.exp((a - 1.0) * math.log(x) + (b - 1.0) * math.log1p(-x) - log_b)
        new = x - f / density if density > 0.0 and math.isfinite(density) else math.nan
        if not lo < new < hi:  # Newton left the bracket: bisect instead
            new = 0.5 * (lo + hi)
        if abs(new - x) <= 1e-15 * max(x, 1e-300) or hi - lo <= 1e-300:
            return new
        x = new
    return x


# --------------------------------------------------------------------------------------
# proportions
# --------------------------------------------------------------------------------------

def _check_confidence(confidence: float) -> None:
    if not 0.0 < confidence < 1.0:
        raise ValueError(f"confidence must lie strictly between 0 and 1 (e.g. 0.95), got {confidence}")


def _check_counts(k: int, n: int) -> tuple[int, int]:
    if int(k) != k or int(n) != n:
        raise ValueError(f"counts must be whole numbers, got k={k}, n={n}")
    k, n = int(k), int(n)
    if n < 0 or k < 0 or k > n:
        raise ValueError(f"need 0 <= k <= n, got k={k}, n={n}")
    return k, n


def wilson_interval(k, n, confidence: float = 0.95):
    """Wilson score interval (Wilson, JASA 22 (1927) 209); k, n may be numpy arrays.

    The bounds are exactly 0 when k = 0 and exactly 1 when k = n; n = 0 gives [0, 1].
    """
    z = z_value(confidence)
    k = np.asarray(k, dtype=float)
    n = np.asarray(n, dtype=float)
    with np.errstate(invalid="ignore", divide="ignore"):
        p = np.where(n > 0, k / np.where(n > 0, n, 1.0), 0.5)
        denom = 2.0 * (n + z * z)
        center = (2.0 * n * p + z * z) / denom
        delta = z / denom * np.sqrt(4.0 * n * p * (1.0 - p) + z * z)
    lo = np.where(k <= 0, 0.0, center - delta)
    hi = np.where(k >= n, 1.0, center + delta)
    lo, hi = np.clip(lo, 0.0, 1.0), np.clip(hi, 0.0, 1.0)
    if lo.ndim == 0:
        return float(lo), float(hi)
    return lo, hi


def clopper_pearson_interval(k: int, n: int, confidence: float = 0.95) -> tuple[float, float]:
    """Clopper–Pearson "exact" interval (Biometrika 26 (1934) 404) from beta quantiles.

    lo = B⁻¹(α/2; k, n−k+1), hi = B⁻¹(1−α/2; k+1, n−k), with lo = 0 at k = 0 and hi = 1 at k = n.
    """
    _check_confidence(confidence)
    k, n = _check_counts(k, n)
    alpha = 1.0 - confidence
    w_lo, w_hi = wilson_interval(k, n, confidence)  # close to the exact bounds: a good Newton start
    lo = 0.0 if k == 0 else beta_ppf(alpha / 2.0, k, n - k + 1, start=w_lo)
    hi = 1.0 if k == n else beta_ppf(1.0 - alpha / 2.0, k + 1, n - k, start=w_hi)
    return lo, hi


def proportion_interval(k: int, n: int, confidence: float = 0.95, method: str = "wilson") -> tuple[float, float]:
    """Interval for a proportion k/n: ``method="wilson"`` (score) or ``"exact"`` (Clopper–Pearson)."""
    k, n = _check_counts(k, n)
    if method == "wilson":
        return wilson_interval(k, n, confidence)
    if method == "exact":
        return clopper_pearson_interval(k, n, confidence)
    raise ValueError(f"unknown interval method {method!r}; use one of: {', '.join(METHODS)}")


def goodman_intervals(counts: Sequence[int], confidence: float = 0.95) -> np.ndarray:
    """Simultaneous intervals for all cells of a multinomial (Goodman, Technometrics 7 (1965) 247).

    With k cells, each interval uses the chi-square (1 df) quantile at 1 − α/k, which is
    z(1 − α/(2k))²; all k intervals then cover together with probability ≥ about ``confidence``.
    Returns an array (k, 2) of (lo, hi).
    """
    _check_confidence(confidence)
    counts = np.asarray(counts, dtype=float)
    if counts.ndim != 1 or (counts < 0).any():
        raise ValueError("counts must be a flat list of non-negative numbers")
    cells = counts.size
    n = counts.sum()
    if cells == 0:
        return np.empty((0, 2))
    if n == 0:
        return np.tile([0.0, 1.0], (cells, 1))
    alpha = 1.0 - confidence
    chi2 = norm_ppf(1.0 - alpha / (2.0 * cells)) ** 2
    p = counts / n
    root = np.sqrt(chi2 * chi2 + 4.0 * n * p * (1.0 - p) * chi2)
    lo = (2.0 * n * p + chi2 - root) / (2.0 * (chi2 + n))
    hi = (2.0 * n * p + chi2 + root) / (2.0 * (chi2 + n))
    return np.clip(np.column_stack([lo, hi]), 0.0, 1.0)


def _clean_labels(labels: Iterable) -> tuple[list[str], int]:
    """Labels as strings, and how many were missing (None, NaN, empty)."""
    texts = label_texts(labels if isinstance(labels, pd.Series) else list(labels))
    blank = pd.isna(texts)
    return texts[~blank].tolist(), int(blank.sum())


def outcome_table(
    labels: Sequence[str] | pd.Series,
    confidence: float = 0.95,
    method: str = "wilson",
    exclude: Sequence[str] = ("excluded",),
    *,
    order: Sequence[str] | None = None,
) -> pd.DataFrame:
    """Count, fraction and interval of each label among the runs that count.

    Runs labeled with one of ``exclude`` and runs without a label are left out of
    the denominator (their numbers are in ``table.attrs['n_excluded']`` and
    ``['n_missing']``).  Rows follow ``order`` (labels listed there appear even with
    zero count), then the other labels by falling count.  With three or more rows,
    Goodman simultaneous intervals are added as ``simultaneous_lo/hi``: the per-label
    ``lo/hi`` hold for one label at a time, the simultaneous ones for all at once.
    """
    values, missing = _clean_labels(labels)
    counts = Counter(values)
    excluded = sum(counts.pop(name, 0) for name in set(exclude))
    names = [name for name in (order or []) if name not in exclude]
    names = list(dict.fromkeys(names))
    names += sorted((name for name in counts if name not in names), key=lambda s: (-counts[s], s))
    n = sum(counts.values())
    rows = []
    for name in names:
        k = counts.get(name, 0)
        lo, hi = proportion_interval(k, n, confidence, method)
        rows.append({"label": name, "count": k, "fraction": k / n if n else math.nan, "lo": lo, "hi": hi})
    table = pd.DataFrame(rows, columns=["label", "count", "fraction", "lo", "hi"])
    table["count"] = table["count"].astype(int)
    if len(names) >= 3:
        region = goodman_intervals(table["count"].to_numpy(), confidence)
        table["simultaneous_lo"] = region[:, 0]
        table["simultaneous_hi"] = region[:, 1]
    table.attrs.update({"n": n, "n_excluded": excluded, "n_missing": missing,
                        "confidence": confidence, "method": method})
    return table


# --------------------------------------------------------------------------------------
# ratios and transition state theory
# --------------------------------------------------------------------------------------

def ratio_interval(k1: int, k2: int, confidence: float = 0.95, method: str = "wilson") -> tuple[float, float, float]:
    """The ratio k1/k2 of two outcome counts with an interval: ``(ratio, lo, hi)``.

    Derived from the binomial interval (Wilson or Clopper–Pearson) on p = k1/(k1+k2),
    the share of outcome 1 among runs that gave either; ratio = p/(1−p) is a monotone
    transform, so the interval's bounds map to the ratio's bounds.  Edge cases:
    k2 = 0 gives ratio = inf and an infinite upper bound; k1 = 0 gives ratio 0 and
    lower bound 0; k1 = k2 = 0 leaves the ratio undefined: ``(nan, nan, nan)``.
    """
    k1, k2 = int(k1), int(k2)
    if k1 < 0 or k2 < 0:
        raise ValueError(f"counts must be non-negative, got {k1} and {k2}")
    if k1 + k2 == 0:
        return math.nan, math.nan, math.nan
    lo_p, hi_p = proportion_interval(k1, k1 + k2, confidence, method)

    def odds(p: float) -> float:
        return math.inf if p >= 1.0 else p / (1.0 - p)

    ratio = math.inf if k2 == 0 else k1 / k2
    return ratio, odds(lo_p), odds(hi_p)


def _rt_joules_per_mole(temperature: float) -> float:
    if not temperature > 0.0 or not math.isfinite(temperature):
        raise ValueError(f"temperature must be a positive number of kelvin, got {temperature}")
    return GAS_CONSTANT_SI * temperature


def _to_joules_per_mole(value: float, unit: str) -> float:
    # core.units holds the conversions: kcal/mol and kJ/mol differ by exactly 4.184
    return float(convert_energy(value, unit, "kJ/mol")) * 1000.0


def tst_ratio(ddg: float, unit: str = "kcal/mol", temperature: float = 298.15) -> float:
    """Product ratio k_a/k_b predicted by transition state theory from ΔΔG‡ = G‡(b) − G‡(a).

    For two channels from one reactant the Eyring–Polanyi prefactors k_B·T/h cancel,
    leaving k_a/k_b = exp(ΔΔG‡ / RT).
    """
    return math.exp(_to_joules_per_mole(ddg, unit) / _rt_joules_per_mole(temperature))


def effective_ddg(ratio: float, unit: str = "kcal/mol", temperature: float = 298.15) -> float:
    """ΔΔG = RT ln(ratio): the barrier difference that TST would need to give ``ratio``.

    ratio 0 gives −inf, inf gives +inf, NaN (undefined ratio) gives NaN.
    """
    rt = _rt_joules_per_mole(temperature)
    if math.isnan(ratio):
        return math.nan
    if ratio < 0:
        raise ValueError(f"a product ratio cannot be negative, got {ratio}")
    if ratio == 0.0:
        return -math.inf
    if math.isinf(ratio):
        return math.inf
    return float(convert_energy(rt * math.log(ratio) / 1000.0, "kJ/mol", unit))


def effective_ddg_interval(k1: int, k2: int, confidence: float = 0.95, method: str = "wilson",
                           unit: str = "kcal/mol", temperature: float = 298.15) -> tuple[float, float, float]:
    """``(ddg, lo, hi)``: the effective ΔΔG of the observed ratio k1/k2 and its interval.

    RT ln(·) is monotone, so the ratio interval maps straight onto a ΔΔG interval.
    """
    ratio, lo, hi = ratio_interval(k1, k2, confidence, method)
    return tuple(effective_ddg(v, unit, temperature) for v in (ratio, lo, hi))  # type: ignore[return-value]


# --------------------------------------------------------------------------------------
# convergence and sample size
# --------------------------------------------------------------------------------------

def convergence(labels_in_order: Sequence[str] | pd.Series, a: str, b: str, confidence: float = 0.95,
                method: str = "wilson") -> pd.DataFrame:
    """How the share of ``a`` among runs ending in ``a`` or ``b`` settles as runs accumulate.

    One row per run, in the order given (the set's own order): ``n`` runs seen so
    far, ``n_a``, ``n_b``, ``fraction_a`` = n_a/(n_a+n_b) with its interval ``lo``/``hi``,
    and the running ``ratio`` n_a/n_b with ``ratio_lo``/``ratio_hi`` (NaN while no run
    has reached either).  The last row equals the interval over all runs.  Wilson rows are
    computed all at once (10⁴ runs in milliseconds); exact rows need a root search per
    distinct count pair (roughly 0.1–0.3 ms each).
    """
    values = label_texts(labels_in_order if isinstance(labels_in_order, pd.Series) else list(labels_in_order))
    is_a = (values == a).astype(bool)  # elementwise on the object array; None (no label) equals neither
    is_b = (values == b).astype(bool)
    n_a = np.cumsum(is_a)
    n_b = np.cumsum(is_b)
    n_ab = n_a + n_b
    if method == "wilson":
        lo, hi = wilson_interval(n_a, n_ab, confidence)
        lo, hi = np.atleast_1d(lo).astype(float), np.atleast_1d(hi).astype(float)
    elif method == "exact":
        # exact bounds cost a root search each: compute once per distinct (k, n) pair
        cache: dict[tuple[int, int], tuple[float, float]] = {}
        lo, hi = np.empty(len(values)), np.empty(len(values))
        for i, key in enumerate(zip(n_a.tolist(), n_ab.tolist())):
            if key not in cache:
                cache[key] = clopper_pearson_interval(key[0], key[1], confidence)
            lo[i], hi[i] = cache[key]
    else:
        raise ValueError(f"unknown interval method {method!r}; use one of: {', '.join(METHODS)}")
    none = n_ab == 0
    with np.errstate(divide="ignore", invalid="ignore"):
        fraction = np.where(none, np.nan, n_a / np.where(none, 1, n_ab))
        ratio = np.where(none, np.nan, np.where(n_b == 0, np.inf, n_a / np.where(n_b == 0, 1, n_b)))
        ratio_lo = np.where(lo >= 1.0, np.inf, lo / (1.0 - lo))
        ratio_hi = np.where(hi >= 1.0, np.inf, hi / (1.0 - hi))
    lo, hi = np.where(none, np.nan, lo), np.where(none, np.nan, hi)
    ratio_lo, ratio_hi = np.where(none, np.nan, ratio_lo), np.where(none, np.nan, ratio_hi)
    return pd.DataFrame({
        "n": np.arange(1, len(values) + 1), "n_a": n_a, "n_b": n_b, "fraction_a": fraction,
        "lo": lo, "hi": hi, "ratio": ratio, "ratio_lo": ratio_lo, "ratio_hi": ratio_hi,
    })


def runs_needed(p: float, half_width: float, confidence: float = 0.95) -> int:
    """Runs needed for an interval of ± ``half_width`` on a proportion near ``p``.

    Normal approximation n = z² p (1 − p) / h², rounded up (at least 1).  It is a
    planning figure: near p = 0 or 1 the real intervals are asymmetric and the
    approximation is optimistic; p = 0.5 gives the worst case.
    """
    if not 0.0 <= p <= 1.0:
        raise ValueError(f"p must lie in [0, 1], got {p}")
    if not 0.0 < half_width < 1.0:
        raise ValueError(f"the half-width must lie in (0, 1), got {half_width}")
    z = z_value(confidence)
    n = z * z * p * (1.0 - p) / (half_width * half_width)
    return max(1, math.ceil(n - 1e-9))  # the tolerance keeps float noise from adding a run


# --------------------------------------------------------------------------------------
# warnings in plain words
# --------------------------------------------------------------------------------------

def _pct(x: float) -> str:
    return f"{100.0 * x:.0f} %"


def reliability_warnings(
    counts: Mapping[str, int],
    products: Sequence[str],
    *,
    ratio: tuple[float, float, float] | None = None,
    pair: tuple[str, str] | None = None,
) -> list[str]:
    """Plain sentences about anything that makes the counts or ratio shaky.

    ``counts`` maps each label (including 'excluded', 'unfinished', ...) to its number
    of runs; ``products`` are the product basins.  Pass the ratio and the pair of
    products it compares (``ratio=(r, lo, hi), pair=(a, b)``) to also check its interval.
    """
    counts = {str(k): int(v) for k, v in counts.items() if int(v) > 0}
    warnings: list[str] = []
    excluded = counts.get("excluded", 0)
    counted = sum(v for k, v in counts.items() if k != "excluded")
    if counted == 0:
        warnings.append("No labeled runs to count: every number in this summary is undefined.")
        if excluded:
            warnings.append(f"All {excluded} labeled runs are excluded.")
        return warnings
    reactive = sum(counts.get(p, 0) for p in products)
    # with one product there is no ratio: speak of the reactive fraction and transmission coefficient
    single = len(products) < 2
    what = "the reactive fraction and transmission coefficient" if single else "the product ratio"
    if reactive == 0:
        warnings.append("No run reached a product: there is no product ratio to report." if not single else
                        "No run reached the product: the reactive fraction is zero and the transmission "
                        "coefficient rests on recrossing runs alone.")
    elif reactive < MIN_REACTIVE_RUNS:
        warnings.append(
            f"Only {reactive} run{'s' if reactive != 1 else ''} reached a product; with fewer than "
            f"{MIN_REACTIVE_RUNS} {what} {'are rough guides' if single else 'is a rough guide'} only "
            f"(rule of thumb). Run more trajectories.")
    compared = list(pair) if pair else [p for p in products]
    if reactive > 0 and len(compared) >= 2:
        for name in compared:
            k = counts.get(name, 0)
            if k == 0:
                warnings.append(f"No run gave {name}: its share may be small but is not shown to be zero, "
                                f"and a ratio over {name} has no finite upper bound.")
            elif k < MIN_MINOR_PRODUCT_RUNS:
                warnings.append(f"Only {k} run{'s' if k != 1 else ''} gave {name}; a ratio resting on fewer than "
                                f"{MIN_MINOR_PRODUCT_RUNS} events of the minor product is very uncertain (rule of thumb).")
    unfinished = counts.get("unfinished", 0)
    if unfinished / counted > MAX_UNFINISHED_FRACTION:
        warnings.append(
            f"{_pct(unfinished / counted)} of runs ({unfinished} of {counted}) are unfinished: they never committed "
            f"to a basin. If they would have {'ended' if single else 'split'} differently {what} "
            f"{'are' if single else 'is'} biased; run them longer.")
    ambiguous = counts.get("ambiguous", 0)
    if ambiguous:
        warnings.append(f"{ambiguous} run{'s are' if ambiguous != 1 else ' is'} labeled ambiguous and left out "
                        f"of the product ratio." if not single else
                        f"{ambiguous} run{'s are' if ambiguous != 1 else ' is'} labeled ambiguous: counted in the "
                        f"reactive fraction's denominator but not as reactive, and left out of the transmission "
                        f"coefficient.")
    if excluded:
        warnings.append(f"{excluded} run{'s were' if excluded != 1 else ' was'} excluded by hand and "
                        f"{'are' if excluded != 1 else 'is'} left out of every count.")
    known = set(products) | set(NON_PRODUCT_LABELS) | {"reactant"}
    unknown = sorted(k for k in counts if k not in known)
    if unknown:
        listed = ", ".join(f"{k} ({counts[k]})" for k in unknown)
        warnings.append(f"Labels not among the products of the rules: {listed}. They count as outcomes "
                        f"but not as products.")
    if ratio is not None and pair is not None:
        r, lo, hi = ratio
        a, b = pair
        if math.isnan(r):
            warnings.append(f"No run gave {a} or {b}: the ratio {a} : {b} is undefined.")
        elif math.isinf(hi) and not math.isinf(r):
            warnings.append(f"The ratio {a} : {b} has no finite upper bound at this confidence.")
        elif math.isfinite(r) and r > 0 and hi - lo > r:
            warnings.append(f"The interval of the ratio {a} : {b} ({lo:.3g} to {hi:.3g}) is wider than the "
                            f"ratio itself ({r:.3g}): it is not yet well determined.")
    return warnings
