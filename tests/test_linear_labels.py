"""Work on a set's labels grows linearly with the number of runs (50,000 synthetic label rows).

No clocks: two deterministic counts guard it.
* The run ids are handed over in a sequence that counts every element it gives out (iteration,
  membership tests, indexing) and stops the test as soon as the count passes a linear budget, so a
  per-run rebuild of a collection of run ids fails at once instead of running for minutes.
* The Python function calls made for n and 4 n rows are counted with a profile hook; linear work
  makes about 4 × as many calls, a per-run loop over all runs makes about 16 ×.
"""

from __future__ import annotations

import sys

import numpy as np
import pandas as pd
import pytest

from basinmark.commands.summary import in_set_order, stale_auto_labels
from basinmark.core.journal_replay import Replay
from basinmark.core.report import label_export_table, summary_text
from basinmark.core.review import compare_labels
from basinmark.core.summary import build_summary

N = 50_000
PRODUCTS = ["amber", "teal"]  # an invented pair of products


class BudgetExceeded(AssertionError):
    pass


class CountingIds(list):
    """A list of run ids that counts the elements it hands out and fails past ``budget``."""

    def __init__(self, items, budget: int):
        super().__init__(items)
        self.budget = budget
        self.touched = 0

    def _spend(self, n: int) -> None:
        self.touched += n
        if self.touched > self.budget:
            raise BudgetExceeded(f"{self.touched} run-id visits for {len(self)} runs: work grows faster than "
                                 f"linearly (budget {self.budget})")

    def __iter__(self):
        for item in super().__iter__():
            self._spend(1)
            yield item

    def __contains__(self, item) -> bool:
        self._spend(len(self))  # a list membership test scans the list
        return super().__contains__(item)

    def __getitem__(self, i):
        out = super().__getitem__(i)
        self._spend(len(out) if isinstance(i, slice) else 1)
        return out


def synthetic_labels(n: int, seed: int = 7) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    runs = np.array([f"r{i:06d}" for i in range(n)], dtype=object)
    final = rng.choice(PRODUCTS + ["recrossing", "unfinished", "excluded"], size=n, p=[.4, .4, .1, .05, .05])
    auto = final.copy()
    auto[::97] = "recrossing"  # some automatic labels the current rules no longer give
    flags = rng.choice(["", "", "energy_drift", "slow_exit"], size=n)
    final = final.astype(object)
    final[::50] = None  # unlabeled runs
    return pd.DataFrame({"run": runs, "final_label": final, "auto_label": auto, "hand_label": None,
                         "flags": flags, "data_changed": rng.random(n) < 0.01})


def test_in_set_order_touches_each_run_id_a_few_times():
    labels = synthetic_labels(N)
    # the set holds all but the last 100 labeled runs, plus 100 runs nobody labeled
    ids = CountingIds(list(labels["run"][: N - 100]) + [f"new{i}" for i in range(100)], budget=10 * N)
    out, warnings = in_set_order(labels, ids)
    assert len(out) == N
    assert list(out["run"][: N - 100]) == list(labels["run"][: N - 100])  # the set's order
    assert list(out["run"][N - 100:]) == [f"new{i}" for i in range(100)]  # then the unlabeled runs
    assert out["final_label"][N - 100:].isna().all()
    # labeled runs missing from the set are not counted, and said (the labeled ones among the last 100)
    gone = labels["run"][N - 100:][labels["final_label"][N - 100:].notna()]
    assert len(warnings) == 1 and str(warnings[0]).startswith(f"{len(gone)} runs labeled in the journal are not in")
    assert ids.touched <= 10 * N


def test_counting_ids_catch_a_per_run_rebuild():
    # the guard itself: rebuilding a set of the ids for every label blows the budget at once
    ids = CountingIds([f"r{i}" for i in range(N)], budget=10 * N)
    with pytest.raises(BudgetExceeded):
        [r for r in ids if r not in set(ids)]


def count_calls(fn) -> int:
    """The Python (and builtin) function calls made while ``fn()`` runs."""
    calls = 0

    def hook(frame, event, arg):
        nonlocal calls
        if event in ("call", "c_call"):
            calls += 1

    sys.setprofile(hook)
    try:
        fn()
    finally:
        sys.setprofile(None)
    return calls


def label_pipeline(n: int):
    """What `summary`, `export-summary` (every format), `export-labels`, review and the journal replay do with
    ``n`` label rows."""
    labels = synthetic_labels(n)
    run_ids = list(labels["run"])
    classified = pd.DataFrame({"run": labels["run"], "outcome": labels["final_label"].fillna("unfinished")})
    events = [{"kind": "label", "run": r, "seq": i, "label": lab, "source": "rule", "content_hash": "h"}
              for i, (r, lab) in enumerate(zip(run_ids, classified["outcome"]))]
    events += [{"kind": "label", "run": r, "seq": n + i, "label": PRODUCTS[i % 2], "source": "hand",
                "labeler": "kim", "content_hash": "h"} for i, r in enumerate(run_ids[::3])]
    side_a = pd.DataFrame({"run": run_ids, "label": classified["outcome"]})
    side_b = side_a.copy()
    side_b.loc[::4, "label"] = PRODUCTS[0]
    hashes = dict.fromkeys(run_ids, "h")

    def steps():
        ordered, _ = in_set_order(labels, run_ids)
        stale = stale_auto_labels(labels, classified)
        summary = build_summary(ordered, PRODUCTS)
        summary.to_text(), summary.to_json(), summary.to_markdown()
        summary_text(summary, "csv"), label_export_table(ordered)  # export-summary's CSV, export-labels' table
        review = compare_labels(side_a, side_b)
        replay = Replay()
        for ev in events:
            replay.apply(ev)
        replay.state(hashes), replay.side("final"), replay.side("kim")
        return ordered, stale, summary, review

    return steps


def test_label_pipeline_calls_grow_linearly():
    n = N // 4  # profiled runs are slow: 12,500 against 3,125 rows tells linear from quadratic just as well
    small, large = label_pipeline(n // 4), label_pipeline(n)
    ordered, stale, summary, review = large()
    assert len(ordered) == n and summary.n_runs == n
    assert stale and review.n == n and len(review.disagreements) > 0
    ratio = count_calls(large) / count_calls(small)
    # linear work gives ~4; a per-run pass over all runs would give ~16 (generous margin either way)
    assert ratio < 6.0, f"4x the rows made {ratio:.1f}x the function calls: something is quadratic"
