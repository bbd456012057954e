"""The summary of a set's labels: outcome table, product ratio, TST comparison, warnings.

:func:`build_summary` computes everything from a label table (one row per run with
a ``final_label``); :class:`Summary` renders it as a DataFrame, Markdown, JSON or a
plain-text report.  Nothing here reads files: the command and the GUI pass the labels in.
"""

from __future__ import annotations

import json
import math
import re
import textwrap
from collections import Counter
from dataclasses import dataclass, field
from typing import Sequence

import numpy as np
import pandas as pd

from basinmark.core import stats
from basinmark.core.cells import label_texts
from basinmark.core.classify import flag_words
from basinmark.core.errors import BasinmarkError
from basinmark.core.tst import Experiment, TSTEstimate
from basinmark.core.units import ENERGY_UNITS, convert_energy

FIXED_ORDER = ("recrossing", "unfinished", "ambiguous")

#: How the transmission coefficient is estimated, in the words every rendering uses.
KAPPA_DEFINITION = ("κ ≈ reactive / (reactive + recrossing), for runs started at the dividing surface: a run is "
                    "reactive whichever of its halves reaches the product, and recrossing runs of both kinds "
                    "(reactant at both ends, product at both ends) count in the denominator "
                    "(common practice, no source)")


class SummaryError(BasinmarkError):
    """The summary cannot be made as asked (unknown product, bad settings)."""


class SummaryWarning(str):
    """A warning sentence that also names the runs it is about (``run_ids``, in the set's order).

    A ``str`` subclass, so every place that prints, joins or searches warnings keeps working; views
    that can act on runs (filter the run table to them) read ``run_ids``.  An empty ``run_ids`` means the
    warning is about the set as a whole or about runs that do not exist (e.g. "no run gave X").
    """

    run_ids: tuple[str, ...]

    def __new__(cls, text: str, run_ids: Sequence[str] = ()) -> "SummaryWarning":
        obj = super().__new__(cls, str(text))
        obj.run_ids = tuple(map(str, run_ids))
        return obj

    def __reduce__(self):  # keep the run ids through pickle and copy
        return (SummaryWarning, (str(self), self.run_ids))

    def with_runs(self) -> str:
        """The sentence followed by the run ids it names (for plain-text output)."""
        return f"{self} Runs: {', '.join(self.run_ids)}." if self.run_ids else str(self)


def as_warning(text: str, run_ids: Sequence[str] | None = None) -> SummaryWarning:
    """``text`` as a :class:`SummaryWarning` (keeping its run ids unless new ones are given)."""
    if run_ids is None:
        return text if isinstance(text, SummaryWarning) else SummaryWarning(text)
    return SummaryWarning(text, run_ids)


def outside_set_warning(runs: Sequence[str], shown: int = 5) -> SummaryWarning | None:
    """The plain sentence for labels the journal holds for runs that are not in the set (None when there are none).

    Such labels are not counted: the set folder says which runs the ratio is about.  The sentence names the first
    runs (they are not in the set, so it gives no run ids to filter a table of the set's runs by)."""
    if not len(runs):
        return None
    n, runs = len(runs), [str(r) for r in runs]
    names = ", ".join(runs[:shown]) + (f" and {n - shown} more" if n > shown else "")
    many = n != 1
    return SummaryWarning(
        f"{n} run{'s' if many else ''} labeled in the journal {'are' if many else 'is'} not in this set ({names}): "
        f"moved, renamed or removed from the set folder, or failed to load. {'Their' if many else 'Its'} labels "
        f"stay in the journal but are not shown or counted here.")


def run_ids_of(warning: str) -> tuple[str, ...]:
    """The run ids a warning names (none for a plain string)."""
    return tuple(getattr(warning, "run_ids", ()) or ())


@dataclass
class Summary:
    """Everything the report shows.  Ratios compare ``a`` to ``b``; ΔΔG is G‡(b) − G‡(a)."""

    table: pd.DataFrame  # stats.outcome_table: label, count, fraction, lo, hi[, simultaneous_lo/hi]
    products: list[str]
    a: str | None
    b: str | None
    k_a: int
    k_b: int
    ratio: tuple[float, float, float]  # (ratio, lo, hi), NaN when undefined
    tst_ratio: float | None  # None when no ΔΔG‡ was given
    effective_ddg: tuple[float, float, float]  # (ΔΔG, lo, hi) in settings['unit']
    warnings: list[SummaryWarning]  # str subclass: each also names its runs (.run_ids)
    n_runs: int  # rows given (labeled or not)
    n_counted: int  # runs in the denominator of the fractions
    n_excluded: int
    n_unlabeled: int
    runs_needed: int | None  # total runs for the share of a among a+b to reach ± half_width
    convergence: pd.DataFrame  # running a : b; with one product, running reactive / (reactive + recrossing)
    settings: dict
    notes: list[str] = field(default_factory=list)  # where the labels came from, etc.
    tst: TSTEstimate | None = None  # the TST estimate with the products it names
    shares: pd.DataFrame = field(default_factory=pd.DataFrame)  # product, count, share, lo, hi, tst_share
    reactive: dict = field(default_factory=dict)  # reactive / recrossing fractions, transmission coefficient
    experiment: tuple[float, float, float] | None = None  # measured a : b (ratio, lo, hi) in the order asked
    measured: Experiment | None = None  # the measurement as stated

    # --- derived ----------------------------------------------------------------------------
    @property
    def n_pair(self) -> int:
        return self.k_a + self.k_b

    @property
    def n_reactive(self) -> int:
        return int(self.table.loc[self.table["label"].isin(self.products), "count"].sum())

    @property
    def confidence_text(self) -> str:
        return f"{100 * self.settings['confidence']:g} %"

    @property
    def show_shares(self) -> bool:
        """Whether the per-product shares are worth a table of their own (three or more, or TST barriers)."""
        return not self.shares.empty and (len(self.products) >= 3 or (self.tst is not None and not self.tst.is_pair))

    def tst_ddg(self) -> float | None:
        """ΔΔG‡ = G‡(b) − G‡(a) of the TST estimate for the ratio asked, in the report's unit (None if not covered)."""
        if self.tst is None or not (self.a and self.b):
            return None
        d = self.tst.ddg_for(self.a, self.b)
        return None if d is None else float(convert_energy(d, self.tst.unit, self.settings["unit"]))

    # --- renderings -------------------------------------------------------------------------
    def to_frame(self) -> pd.DataFrame:
        """One tidy table: a row per outcome (value = fraction), then ratio, TST ratio, effective ΔΔG."""
        rows = []
        has_sim = "simultaneous_lo" in self.table
        for r in self.table.itertuples(index=False):
            rows.append({"quantity": "fraction", "label": r.label, "count": r.count, "value": r.fraction,
                         "lo": r.lo, "hi": r.hi,
                         "simultaneous_lo": r.simultaneous_lo if has_sim else math.nan,
                         "simultaneous_hi": r.simultaneous_hi if has_sim else math.nan, "unit": ""})
        if self.a and self.b:
            pair = f"{self.a}:{self.b}"
            rows.append({"quantity": "ratio", "label": pair, "count": self.n_pair, "value": self.ratio[0],
                         "lo": self.ratio[1], "hi": self.ratio[2], "unit": ""})
            if self.tst_ratio is not None:
                rows.append({"quantity": "tst_ratio", "label": pair, "value": self.tst_ratio, "unit": ""})
            ddg = self.effective_ddg
            rows.append({"quantity": "effective_ddg", "label": pair, "count": self.n_pair, "value": ddg[0],
                         "lo": ddg[1], "hi": ddg[2], "unit": self.settings["unit"]})
            if self.experiment is not None:
                rows.append({"quantity": "experiment_ratio", "label": pair, "value": self.experiment[0],
                             "lo": self.experiment[1], "hi": self.experiment[2], "unit": ""})
        if self.show_shares:
            for r in self.shares.itertuples(index=False):
                rows.append({"quantity": "share", "label": r.product, "count": r.count, "value": r.share,
                             "simultaneous_lo": r.lo, "simultaneous_hi": r.hi, "unit": ""})
                if not math.isnan(r.tst_share):
                    rows.append({"quantity": "tst_share", "label": r.product, "value": r.tst_share, "unit": ""})
        for key in ("reactive_fraction", "recrossing_fraction", "transmission_coefficient"):
            q = self.reactive.get(key)
            if q is not None:
                rows.append({"quantity": key, "label": "", "count": q["k"], "value": q["value"], "lo": q["lo"],
                             "hi": q["hi"], "unit": ""})
        frame = pd.DataFrame(rows, columns=["quantity", "label", "count", "value", "lo", "hi",
                                            "simultaneous_lo", "simultaneous_hi", "unit"])
        frame["count"] = frame["count"].astype("Int64")
        has_sim = has_sim or self.show_shares
        if not has_sim:
            frame = frame.drop(columns=["simultaneous_lo", "simultaneous_hi"])
        return frame

    def to_dict(self) -> dict:
        """Plain data (JSON-ready: infinities as the strings "inf"/"-inf", undefined values as null)."""
        out = {
            "settings": dict(self.settings),
            "n_runs": self.n_runs, "n_counted": self.n_counted, "n_excluded": self.n_excluded,
            "n_unlabeled": self.n_unlabeled, "n_reactive": self.n_reactive,
            "outcomes": [{k: _json_number(v) for k, v in row.items()}
                         for row in self.table.to_dict(orient="records")],
            "ratio": None, "tst_ratio": None, "effective_ddg": None,
            "runs_needed": self.runs_needed, "warnings": [str(w) for w in self.warnings],
            # the same warnings with the runs each one is about (a list of run ids, maybe empty)
            "warning_runs": [{"warning": str(w), "run_ids": list(run_ids_of(w))} for w in self.warnings],
            "notes": list(self.notes),
            "tst": _tst_dict(self.tst),
            "shares": [{k: _json_number(v) for k, v in row.items()} for row in self.shares.to_dict(orient="records")],
            "reactive": {k: {kk: _json_number(vv) for kk, vv in v.items()} if isinstance(v, dict) else v
                         for k, v in self.reactive.items()},
            "experiment_ratio": None,
        }
        if self.a and self.b:
            out["ratio"] = {"a": self.a, "b": self.b, "k_a": self.k_a, "k_b": self.k_b,
                            **dict(zip(("value", "lo", "hi"), map(_json_number, self.ratio)))}
            out["effective_ddg"] = {"unit": self.settings["unit"],
                                    **dict(zip(("value", "lo", "hi"), map(_json_number, self.effective_ddg)))}
            out["tst_ratio"] = _json_number(self.tst_ratio)
            if self.experiment is not None:
                out["experiment_ratio"] = dict(zip(("value", "lo", "hi"), map(_json_number, self.experiment)))
        return out

    def to_json(self, indent: int | None = 2) -> str:
        return json.dumps(self.to_dict(), indent=indent, ensure_ascii=False, allow_nan=False)

    def _outcome_rows(self) -> tuple[list[str], list[list[str]]]:
        ci = f"{self.confidence_text} interval"
        head = ["outcome", "runs", "fraction", ci]
        sim = "simultaneous_lo" in self.table
        if sim:
            head.append("all outcomes at once")
        rows = []
        for r in self.table.itertuples(index=False):
            row = [r.label, str(r.count), _fixed(r.fraction), f"{_fixed(r.lo)}–{_fixed(r.hi)}"]
            if sim:
                row.append(f"{_fixed(r.simultaneous_lo)}–{_fixed(r.simultaneous_hi)}")
            rows.append(row)
        return head, rows

    def lines(self) -> list[str]:
        """The sentences of the report after the table (ratio, TST, effective ΔΔG, runs needed, κ)."""
        s = self.settings
        out: list[str] = []
        if not (self.a and self.b):
            out += self._reactive_lines(full=True)
            if self.tst is not None or s.get("ddg") is not None:
                out.append("A TST estimate was given, but with fewer than two products there is no ratio to "
                           "compare it with (nothing to compare TST with).")
            return out
        r, lo, hi = self.ratio
        ci = self.confidence_text
        group = "reactive runs" if set(self.products) == {self.a, self.b} else f"runs ending in {self.a} or {self.b}"
        if math.isnan(r):
            out.append(f"{self.a} : {self.b} is undefined: no run ended in either.")
        else:
            out.append(f"{self.a} : {self.b} = {_num(r)} ({ci} CI {_num(lo)}–{_num(hi)}) from {self.n_pair} {group}"
                       f" ({self.k_a} : {self.k_b})")
        unit, temp = s["unit"], s["temperature"]
        if self.tst is not None:
            out.append(self._tst_line())
        if self.experiment is not None:
            e, elo, ehi = self.experiment
            exp = self.measured
            line = (f"Experiment: {self.a} : {self.b} = {_num(e)} (from {_num(elo)} to {_num(ehi)})"
                    + (f" ({exp.source})" if exp is not None and exp.source else ""))
            if not math.isnan(r):
                line += (", overlapping the runs' interval" if elo <= hi and ehi >= lo
                         else ", apart from the runs' interval: the runs and the measurement disagree")
            out.append(line)
        elif self.measured is not None:
            out.append(f"The measured ratio ({self.measured.text()}) is about another pair; choose "
                       f"{self.measured.a} : {self.measured.b} to see it beside the runs")
        d, dlo, dhi = self.effective_ddg
        if not math.isnan(d):
            out.append(f"Effective ΔΔG = {_energy(d)} {unit} ({ci} CI {_energy(dlo)} to {_energy(dhi)}) at "
                       f"{temp:.2f} K: the barrier difference TST would need to give the observed ratio")
        if self.show_shares and self.tst is not None and not self.tst.is_pair:
            out.append(self._shares_line())
        target = f"For ±{s['half_width']:g} on the share of {self.a} among {self.a} + {self.b}"
        if self.runs_needed is not None:
            # runs_needed counts runs that count (labeled, not excluded), so compare like with like
            still = self.runs_needed - self.n_counted
            tail = (f"{still} more than the {self.n_counted} counted here" if still > 0
                    else f"the {self.n_counted} counted here are enough")
            out.append(f"{target}, about {self.runs_needed} counted runs in all are needed at the present mix "
                       f"({tail}; normal approximation)")
        elif self.n_pair > 0:
            out.append(f"{target}, the number of runs needed cannot be estimated until both products have "
                       f"appeared")
        out += self._reactive_lines(full=False)
        return out

    def _tst_line(self) -> str:
        tst, unit, r, lo, hi = self.tst, self.settings["unit"], *self.ratio
        if self.tst_ratio is None:
            return (f"The TST estimate ({tst.text()}) names {', '.join(tst.products)}: it gives no prediction "
                    f"for {self.a} : {self.b}")
        form = "from per-product barriers" if not tst.is_pair else ""
        line = (f"TST with ΔΔG‡ = {self.tst_ddg():.2f} {unit} (G‡({self.b}) − G‡({self.a}){', ' + form if form else ''})"
                f" at {tst.temperature:.2f} K predicts {_num(self.tst_ratio)}")
        if not math.isnan(r):
            inside = lo <= self.tst_ratio <= hi
            line += (", inside the observed interval" if inside
                     else ", outside the observed interval: the runs do not bear out the TST prediction")
        return line

    def _shares_line(self) -> str:
        sh = self.shares.dropna(subset=["tst_share"])
        outside = [r.product for r in sh.itertuples(index=False) if not r.lo <= r.tst_share <= r.hi]
        n = int(self.shares["count"].sum())
        if n == 0:
            return "TST shares cannot be compared: no run reached a product."
        if outside:
            return (f"TST shares ({self.tst.text()}) lie outside the simultaneous intervals for "
                    f"{', '.join(outside)}: the runs do not bear out the TST prediction there")
        return (f"TST shares ({self.tst.text()}) lie inside the simultaneous intervals of all {len(sh)} "
                f"products with a barrier")

    def _reactive_lines(self, full: bool) -> list[str]:
        q = self.reactive
        if not q:
            return []
        ci = self.confidence_text
        rf, rc, kappa = q["reactive_fraction"], q["recrossing_fraction"], q["transmission_coefficient"]

        def frac(d: dict) -> str:
            return f"{_fixed(d['value'])} ({ci} CI {_fixed(d['lo'])}–{_fixed(d['hi'])})" if d["n"] else "undefined"

        if not full:
            return [f"Reactive fraction {frac(rf)}, recrossing fraction {frac(rc)} of {rf['n']} counted runs; "
                    f"transmission coefficient {frac(kappa)} = reactive / (reactive + recrossing) "
                    f"(common practice, no source)"]
        names = ", ".join(self.products)
        out = []
        if not self.products:
            out.append("No product among the labels: only the recrossing fraction can be reported.")
        else:
            out.append(f"Reactive fraction = {frac(rf)}: {rf['k']} of {rf['n']} counted runs joined the reactant "
                       f"to {names}")
        out.append(f"Recrossing fraction = {frac(rc)}: {rc['k']} of {rc['n']} counted runs ended in the same "
                   f"basin at both ends")
        out.append(f"Transmission coefficient = {frac(kappa)} from {kappa['k']} reactive and "
                   f"{kappa['n'] - kappa['k']} recrossing runs; {KAPPA_DEFINITION}")
        return out

    def to_text(self) -> str:
        """A readable report: the outcome table, the ratio sentences, then warnings in plain words."""
        head, rows = self._outcome_rows()
        widths = [max(len(h), *(len(r[i]) for r in rows)) if rows else len(h) for i, h in enumerate(head)]

        def fmt(cells: list[str]) -> str:
            return "  ".join(c.ljust(w) if i == 0 else c.rjust(w) for i, (c, w) in enumerate(zip(cells, widths))).rstrip()

        out = [self._headline()]
        if self.notes:
            out += [f"Note: {n}" for n in self.notes]
        out.append("")
        if rows:
            out += [fmt(head), fmt(["-" * w for w in widths])] + [fmt(r) for r in rows]
            out += [self._caption(), ""]
        if self.show_shares:
            shead, srows = self._share_rows()
            widths = [max(len(h), *(len(r[i]) for r in srows)) for i, h in enumerate(shead)]
            out += [self._share_title(), fmt(shead), fmt(["-" * w for w in widths])] + [fmt(r) for r in srows]
            out.append("")
        out += self.lines()
        if self.warnings:
            out += ["", "Warnings:"]
            for w in self.warnings:
                out.append(f"  - {w}")
                if run_ids_of(w):
                    out += textwrap.wrap("runs: " + ", ".join(run_ids_of(w)), width=100, initial_indent="    ",
                                         subsequent_indent="      ", break_on_hyphens=False)
        return "\n".join(out) + "\n"

    def to_markdown(self) -> str:
        head, rows = self._outcome_rows()
        out = ["## Summary", "", self._headline(), "",
               "| " + " | ".join(head) + " |", "|" + "|".join([" --- "] + [" ---: "] * (len(head) - 1)) + "|"]
        out += ["| " + " | ".join(r) + " |" for r in rows]
        out += ["", self._caption(), ""]
        if self.show_shares:
            shead, srows = self._share_rows()
            out += [self._share_title(), "", "| " + " | ".join(shead) + " |",
                    "|" + "|".join([" --- "] + [" ---: "] * (len(shead) - 1)) + "|"]
            out += ["| " + " | ".join(r) + " |" for r in srows] + [""]
        out += [f"- {line}" for line in self.lines()]
        if self.notes:
            out += [""] + [f"*Note:* {n}" for n in self.notes]
        if self.warnings:
            out += ["", "### Warnings", ""]
            for w in self.warnings:
                ids = run_ids_of(w)
                out.append(f"- {w}" + (f" Runs: {', '.join(f'`{r}`' for r in ids)}." if ids else ""))
        return "\n".join(out) + "\n"

    def _share_title(self) -> str:
        n = int(self.shares["count"].sum())
        return (f"Product shares among the {n} reactive runs ({self.confidence_text} Goodman simultaneous "
                f"intervals, all products at once):")

    def _share_rows(self) -> tuple[list[str], list[list[str]]]:
        tst = "tst_share" in self.shares and self.shares["tst_share"].notna().any()
        head = ["product", "runs", "share", "all products at once"] + (["TST share", "TST inside"] if tst else [])
        rows = []
        for r in self.shares.itertuples(index=False):
            row = [r.product, str(r.count), _fixed(r.share), f"{_fixed(r.lo)}–{_fixed(r.hi)}"]
            if tst:
                known = not math.isnan(r.tst_share)
                row += [_fixed(r.tst_share) if known else "—",
                        ("yes" if r.lo <= r.tst_share <= r.hi else "no") if known and not math.isnan(r.share) else "—"]
            rows.append(row)
        return head, rows

    def _caption(self) -> str:
        method = "Wilson score" if self.settings["method"] == "wilson" else "Clopper–Pearson exact"
        if "simultaneous_lo" in self.table:
            return (f"(intervals: {method}, each for one outcome alone; 'all outcomes at once': Goodman "
                    f"simultaneous intervals)")
        return f"(intervals: {method})"

    def _headline(self) -> str:
        parts = [f"{self.n_counted} runs counted"]
        if self.n_excluded:
            parts.append(f"{self.n_excluded} excluded")
        if self.n_unlabeled:
            parts.append(f"{self.n_unlabeled} without a label")
        return f"Outcomes of {self.n_runs} runs: " + ", ".join(parts) + "."


def _json_number(value):
    if isinstance(value, float) or hasattr(value, "dtype"):
        try:
            value = float(value)
        except (TypeError, ValueError):
            return value
        if math.isnan(value):
            return None
        if math.isinf(value):
            return "inf" if value > 0 else "-inf"
        return value
    return value


def _fixed(x: float) -> str:
    return "" if x is None or math.isnan(x) else f"{x:.3f}"


def _num(x: float) -> str:
    if x is None or math.isnan(x):
        return "undefined"
    if math.isinf(x):
        return "∞" if x > 0 else "−∞"
    if x >= 100:
        return f"{x:.0f}"
    if x >= 10:
        return f"{x:.1f}"
    return f"{x:.2f}" if x >= 0.01 else f"{x:.2g}"


def _energy(x: float) -> str:
    if math.isinf(x):
        return "∞" if x > 0 else "−∞"
    return f"{x:.2f}"


#: flags that are not a reason to look at a run (the energy check has its own warning; data_changed is the journal's)
_NOT_A_LOOK = ("energy_drift", "data_changed")


def flag_warnings(labels: pd.DataFrame) -> list[SummaryWarning]:
    """Warnings about flagged runs that are still counted (see :func:`build_summary`), with their run ids."""
    if "flags" not in labels:
        return []
    runs = _runs(labels)
    final = label_texts(labels["final_label"])
    counted = ~pd.isna(final) & (final != "excluded")
    by_hand = ~pd.isna(label_texts(labels["hand_label"])) if "hand_label" in labels else np.zeros(len(final), bool)
    # runs share a handful of distinct flag texts: each distinct text is split once (no call per run)
    codes, texts = pd.factorize(labels["flags"].fillna("").astype(str), use_na_sentinel=False)
    parts = [str(t).split(";") for t in texts]
    out = []
    drift = counted & np.isin(codes, [i for i, p in enumerate(parts) if "energy_drift" in p])
    if drift.any():
        n, looked = int(drift.sum()), int((drift & by_hand).sum())
        seen = f"; {looked} of them kept by hand" if looked else ", none of them looked at by hand"
        out.append(SummaryWarning(
            f"{n} counted run{'s' if n != 1 else ''} failed the energy check (total energy drifted more "
            f"than the rules allow){seen}. Their outcomes may be artefacts of a poor integration: look at "
            f"them and exclude the bad ones.", runs[drift]))
    unlooked = counted & ~by_hand
    per_text = np.bincount(codes[unlooked], minlength=len(texts))
    tally: Counter = Counter()
    for p, k in zip(parts, per_text.tolist()):
        if k:
            tally.update({f: k * p.count(f) for f in p if f and f not in _NOT_A_LOOK})
    if tally:
        waiting = unlooked & np.isin(codes, [i for i, p in enumerate(parts) if any(f and f not in _NOT_A_LOOK for f in p)])
        n = int(waiting.sum())
        listed = ", ".join(f"{flag_words(name)} {k}" for name, k in sorted(tally.items()))
        out.append(SummaryWarning(f"{n} counted run{'s' if n != 1 else ''} flagged for a look ({listed}) "
                                  f"{'have' if n != 1 else 'has'} no hand label yet.", runs[waiting]))
    return out


def _runs(labels: pd.DataFrame) -> np.ndarray:
    """The run ids of a label table as an array (positional, so boolean masks index it)."""
    if "run" in labels:
        return np.asarray(labels["run"].astype(str), dtype=object)
    return np.asarray([str(r) for r in labels.index], dtype=object)


def _label_mask(final: np.ndarray, names: set[str]) -> np.ndarray:
    """Which of ``final`` (from :func:`label_texts`) are one of ``names``."""
    return pd.Series(final, dtype=object).isin(list(names)).to_numpy()


def attribute_reliability(counts: dict, products: Sequence[str], labels: pd.DataFrame, **kw) -> list[SummaryWarning]:
    """:func:`stats.reliability_warnings` with each sentence given the runs it is about.

    The rule: a sentence is about the runs whose final label it names; a sentence that names no label
    (e.g. "only 12 runs reached a product") is about the runs that reached a product.  To find the
    labels a sentence names without reading its wording, the warnings are made a second time with
    every product (and every label the rules do not know) renamed to a unique token: the two calls see
    the same counts, so they give the same sentences in the same order, and a token in the second
    sentence says exactly which product the first one names (a product called "left" is not confused
    with the words "left out").  The fixed labels keep their names and are found as whole words.
    """
    texts = stats.reliability_warnings(counts, products, **kw)
    fixed = set(stats.NON_PRODUCT_LABELS) | {"reactant"}
    names = [str(k) for k in counts if str(k) not in fixed]
    names += [p for p in products if p not in names]
    token = {name: f"\u27e6{i}\u27e7" for i, name in enumerate(names)}
    tkw = dict(kw)
    if kw.get("pair") is not None:
        tkw["pair"] = tuple(token.get(p, p) for p in kw["pair"])
    probe = stats.reliability_warnings({token.get(str(k), str(k)): v for k, v in counts.items()},
                                       [token[p] for p in products], **tkw)
    runs = _runs(labels)
    final = label_texts(labels["final_label"])
    out = []
    for i, text in enumerate(texts):
        if len(probe) != len(texts):  # cannot happen while the checks read counts only; then say nothing
            out.append(SummaryWarning(text))
            continue
        named = {name for name, tok in token.items() if tok in probe[i]}
        named |= {f for f in fixed if re.search(rf"\b{re.escape(f)}\b", probe[i])}
        named = named or set(products)
        out.append(SummaryWarning(text, runs[_label_mask(final, named)]))
    return out


def _pick_pair(counts: dict[str, int], products: Sequence[str], a: str | None, b: str | None):
    for name in (a, b):
        if name is not None and name not in products:
            raise SummaryError(f"{name!r} is not a product of the rules; choose from: {', '.join(products) or '(none)'}")
    if a is not None and a == b:
        raise SummaryError(f"cannot compare {a!r} with itself; name two different products")
    rank = sorted(products, key=lambda p: (-counts.get(p, 0), list(products).index(p)))
    if a is None:
        a = next((p for p in rank if p != b), None)
    if b is None:
        b = next((p for p in rank if p != a), None)
    return a, b


def build_summary(
    labels: pd.DataFrame,
    products: Sequence[str],
    a: str | None = None,
    b: str | None = None,
    ddg: float | None = None,
    unit: str = "kcal/mol",
    temperature: float = 298.15,
    confidence: float = 0.95,
    method: str = "wilson",
    *,
    half_width: float = 0.05,
    notes: Sequence[str] = (),
    extra_warnings: Sequence[str] = (),
    tst: TSTEstimate | None = None,
    experiment: Experiment | None = None,
) -> Summary:
    """Summarise a label table (columns ``run``, ``final_label``; rows in the set's own order).

    ``a``/``b`` default to the two most common products.  The TST comparison comes from ``tst`` (a
    :class:`~basinmark.core.tst.TSTEstimate` naming its products: the ratio asked is converted to the
    order asked) or from ``ddg`` = G‡(b) − G‡(a) in ``unit``, which needs ``a`` and ``b`` named.  Runs without a label and ``excluded`` runs are left out of
    the fractions.  Optional columns add warnings: ``data_changed`` (from the journal) for labels
    set on files that have changed since; ``flags`` (';'-joined, from classification) for counted
    runs that failed the energy check or await a look, using ``hand_label`` when present to tell
    which ones a person has labeled.
    """
    if "final_label" not in labels:
        raise SummaryError("the label table has no 'final_label' column")
    if method not in stats.METHODS:
        raise SummaryError(f"unknown interval method {method!r}; use one of: {', '.join(stats.METHODS)}")
    if not 0.0 < confidence < 1.0:
        raise SummaryError(f"the confidence must lie between 0 and 1 (e.g. 0.95), got {confidence}")
    if not temperature > 0:
        raise SummaryError(f"the temperature must be positive (kelvin), got {temperature}")
    if not any(unit.lower() == u.lower() for u in ENERGY_UNITS):
        raise SummaryError(f"unknown energy unit {unit!r}; use one of: {', '.join(ENERGY_UNITS)}")
    if not 0.0 < half_width < 1.0:
        raise SummaryError(f"the interval half-width must lie between 0 and 1, got {half_width}")
    products = [str(p) for p in products]
    if ddg is not None:
        if tst is not None:
            raise SummaryError("give either ddg (with its pair) or a TST estimate, not both")
        if a is None or b is None:
            raise SummaryError(f"ΔΔG‡ = {ddg:g} {unit} does not say which products it compares: name the pair "
                               f"(ΔΔG‡ = G‡(b) − G‡(a) for the ratio a : b)")
        tst = TSTEstimate.pair(a, b, ddg, unit, temperature, origin="the ΔΔG‡ given")
    if tst is not None:
        tst.check_products(products)
    final = label_texts(labels["final_label"])  # None where there is no label
    present = set(pd.unique(final[~pd.isna(final)]))
    order = products + [name for name in FIXED_ORDER if name in present]
    table = stats.outcome_table(final, confidence, method, order=order)
    counts = dict(zip(table["label"], table["count"].astype(int)))
    n_excluded, n_missing = table.attrs["n_excluded"], table.attrs["n_missing"]
    a, b = _pick_pair(counts, products, a, b)

    if a and b:
        k_a, k_b = counts.get(a, 0), counts.get(b, 0)
        ratio = stats.ratio_interval(k_a, k_b, confidence, method)
        eff = tuple(stats.effective_ddg(v, unit, temperature) for v in ratio)
        conv = stats.convergence(final, a, b, confidence, method)
    else:
        k_a = counts.get(a, 0) if a else 0
        k_b = 0
        ratio = eff = (math.nan, math.nan, math.nan)
        # one product: the running transmission coefficient, reactive / (reactive + recrossing), in set order
        conv = stats.convergence(final, a, "recrossing", confidence, method) if a else pd.DataFrame()
    tst_r = tst.ratio(a, b) if tst is not None and a and b else None
    if experiment is None and tst is not None:
        experiment = tst.experiment
    if experiment is not None:
        for name in (experiment.a, experiment.b):
            if name not in products:
                raise SummaryError(f"the measured ratio names {name!r}, which is not a product of the rules; "
                                   f"products are: {', '.join(products) or '(none)'}")
    measured = experiment
    experiment = measured.interval(a, b) if measured is not None and a and b else None
    shares = product_shares(counts, products, confidence, tst)
    reactive = reactive_counts(counts, products, confidence, method)

    counts_all = dict(counts, excluded=n_excluded)
    # every warning names its runs (SummaryWarning.run_ids), so that a view can show exactly those
    warnings = attribute_reliability(counts_all, products, labels, ratio=ratio if a and b else None,
                                     pair=(a, b) if a and b else None)
    run_ids = _runs(labels)
    if n_missing:
        blank = pd.isna(final)
        warnings.append(SummaryWarning(f"{n_missing} run{'s have' if n_missing != 1 else ' has'} no label yet and "
                                       f"{'are' if n_missing != 1 else 'is'} not counted.", run_ids[blank]))
    if "data_changed" in labels:
        changed_mask = labels["data_changed"].fillna(False).astype(bool).to_numpy(dtype=bool)
        changed = int(changed_mask.sum())
        if changed:
            warnings.append(SummaryWarning(
                f"{changed} label{'s were' if changed != 1 else ' was'} set on run files that have "
                f"changed since: check those runs again before trusting the counts.", run_ids[changed_mask]))

    warnings += flag_warnings(labels)
    warnings += [as_warning(w) for w in extra_warnings]

    needed = None
    n_counted = int(table.attrs["n"])
    if a and b and k_a > 0 and k_b > 0:  # at p = 0 or 1 the normal approximation says nothing
        pair_share = (k_a + k_b) / n_counted
        pair_runs = stats.runs_needed(k_a / (k_a + k_b), half_width, confidence)
        needed = math.ceil(pair_runs / pair_share - 1e-9)

    pair_ddg = tst.ddg_for(a, b) if tst is not None and a and b else None
    settings = {"confidence": confidence, "method": method, "unit": unit, "temperature": temperature,
                "ddg": None if pair_ddg is None else float(convert_energy(pair_ddg, tst.unit, unit)),
                "half_width": half_width, "a": a, "b": b}
    return Summary(table=table, products=products, a=a, b=b, k_a=k_a, k_b=k_b, ratio=ratio, tst_ratio=tst_r,
                   effective_ddg=eff, warnings=warnings, n_runs=len(labels), n_counted=n_counted,
                   n_excluded=n_excluded, n_unlabeled=n_missing, runs_needed=needed, convergence=conv,
                   settings=settings, notes=list(notes), tst=tst, shares=shares, reactive=reactive,
                   experiment=experiment, measured=measured)


def product_shares(counts: dict[str, int], products: Sequence[str], confidence: float,
                   tst: TSTEstimate | None = None) -> pd.DataFrame:
    """Each product's share among the reactive runs, with Goodman simultaneous intervals over all products.

    ``tst_share`` is the share TST predicts among the products it has a barrier for (NaN otherwise);
    a pair estimate gives none here (its two shares are the ratio, shown on its own line).
    """
    cols = ["product", "count", "share", "lo", "hi", "tst_share"]
    if len(products) < 2:
        return pd.DataFrame(columns=cols)
    k = [int(counts.get(p, 0)) for p in products]
    n = sum(k)
    region = stats.goodman_intervals(k, confidence)
    predicted = tst.shares(products) if tst is not None and not tst.is_pair else {}
    rows = [{"product": p, "count": c, "share": c / n if n else math.nan, "lo": region[i, 0], "hi": region[i, 1],
             "tst_share": predicted.get(p, math.nan)} for i, (p, c) in enumerate(zip(products, k))]
    return pd.DataFrame(rows, columns=cols)


def reactive_counts(counts: dict[str, int], products: Sequence[str], confidence: float, method: str) -> dict:
    """Reactive and recrossing fractions of the counted runs and the transmission coefficient.

    Each entry is ``{"k", "n", "value", "lo", "hi"}`` with the interval of ``method``; the transmission
    coefficient is reactive / (reactive + recrossing) (see :data:`KAPPA_DEFINITION`).
    """
    n = int(sum(counts.values()))
    reactive = int(sum(counts.get(p, 0) for p in products))
    recrossing = int(counts.get("recrossing", 0))

    def part(k: int, total: int) -> dict:
        lo, hi = stats.proportion_interval(k, total, confidence, method)
        return {"k": k, "n": total, "value": k / total if total else math.nan,
                "lo": lo if total else math.nan, "hi": hi if total else math.nan}

    return {"reactive_fraction": part(reactive, n), "recrossing_fraction": part(recrossing, n),
            "transmission_coefficient": part(reactive, reactive + recrossing), "definition": KAPPA_DEFINITION}


def _tst_dict(tst: TSTEstimate | None) -> dict | None:
    if tst is None:
        return None
    out = {"unit": tst.unit, "temperature": tst.temperature, "source": tst.source, "stated_in": tst.origin}
    if tst.is_pair:
        out.update({"major": tst.major, "minor": tst.minor, "ddg": tst.ddg})
    else:
        out["barriers"] = dict(tst.barriers)
        out["shares"] = tst.shares()
    if tst.experiment is not None:
        e = tst.experiment
        out["experiment"] = {"numerator": e.a, "denominator": e.b, "ratio": e.ratio,
                             "uncertainty": e.uncertainty, "source": e.source}
    return out
