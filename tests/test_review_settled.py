"""Which disagreements of a review a journal has already decided, without reading the journal's every event.

Found at 10,000 runs with two people's labels (20,000 events): choosing the review's two sources took up to 153 ms,
a third of it a pass over every journal event looking for the few review decisions, each time the queue was shown.
The journal's replay now keeps the decisions as they are applied (`LabelJournal.review_decisions`)."""

from __future__ import annotations

import pytest
from test_linear_labels import count_calls

from basinmark.core.journal import LabelJournal
from basinmark.core.review import compare_labelers
from basinmark.gui.review_view import settled_runs

H = "ab" * 32


def _journal(path, n: int, labeler_b: str = "ben") -> LabelJournal:
    j = LabelJournal.open(path, labeler="ana")
    runs = [f"run{i:05d}" for i in range(n)]
    j.record_batch([{"run_id": r, "label": "amber", "content_hash": H} for r in runs], source="hand")
    j.record_batch([{"run_id": r, "label": "teal" if i % 5 == 0 else "amber", "content_hash": H, "labeler": labeler_b}
                    for i, r in enumerate(runs)], source="hand")
    return j


def test_decided_disagreements_are_settled_and_survive_reopening(tmp_path):
    path = tmp_path / "basinmark-labels.jsonl"
    with _journal(path, 40) as j:
        rv = compare_labelers(j, "ana", "ben")
        assert len(rv.disagreements) == 8 and settled_runs(j, rv) == set()
        first = rv.disagreements.iloc[0]
        j.adjudicate(first.run, "teal", content_hash=H, label_a=first.label_a, label_b=first.label_b,
                     reviewer="chief")
        # a decision between other labels (an older disagreement of the same run) does not settle this one
        second = rv.disagreements.iloc[1]
        j.adjudicate(second.run, "teal", content_hash=H, label_a="recrossing", label_b=second.label_b,
                     reviewer="chief")
        assert settled_runs(j, rv) == {first.run}
        assert j.review_decisions() == {(first.run, "amber", "teal"), (second.run, "recrossing", "teal")}
    with LabelJournal.open(path, labeler="chief", readonly=True) as j:
        assert settled_runs(j, rv) == {first.run}


@pytest.mark.parametrize("n", [4000])
def test_settled_runs_do_not_read_every_event(tmp_path, n):
    with _journal(tmp_path / "small.jsonl", n // 4) as small, _journal(tmp_path / "large.jsonl", n) as large:
        cost = []
        for j in (small, large):
            rv = compare_labelers(j, "ana", "ben")
            settled_runs(j, rv)
            cost.append(count_calls(lambda: settled_runs(j, rv)))
        # 2 n events and n / 5 disagreements in the large journal against a quarter of each: a pass over the
        # events made ~3 calls an event (14,000+ more); the decisions looked up directly make none per event
        assert cost[1] - cost[0] < 200, cost
