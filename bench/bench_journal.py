"""Label journal speed: one batch of 10,000 automatic labels, open + replay and verify of 100,000 events.

Targets: batch < 1 s, open and replay 100,000 events < 2 s, verify 100,000 events < 3 s.
Prints each measured time and its ratio to the target (below 1.0 meets it).
Run: ``.venv/bin/python bench/bench_journal.py``
"""

from __future__ import annotations

import random
import tempfile
import time
from pathlib import Path

from basinmark.core.journal import LabelJournal, verify_journal

TARGETS = {"batch_10k": 1.0, "open_replay_100k": 2.0, "verify_100k": 3.0}
LABELS = ["alpha", "beta", "recrossing", "unfinished"]


def entries(n: int, rng: random.Random, offset: int = 0) -> list[dict]:
    return [{"run_id": f"run{(offset + i) % 5000:05d}", "label": rng.choice(LABELS),
             "content_hash": f"{rng.getrandbits(256):064x}", "reason": "flags: late_commit" if i % 7 == 0 else ""}
            for i in range(n)]


def best_of(fn, repeat: int = 3) -> float:
    times = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    return min(times)


def main() -> None:
    rng = random.Random(1)
    with tempfile.TemporaryDirectory() as d:
        results = {}
        # 1. one batch of 10,000 automatic labels into a fresh journal (includes the single fsync)
        def batch() -> None:
            path = Path(d) / f"batch-{rng.getrandbits(32)}.jsonl"
            with LabelJournal.open(path, labeler="bench") as j:
                work = entries(10_000, rng)
                t0 = time.perf_counter()
                j.record_batch(work, rules_hash="0f" * 32)
                batch.elapsed = time.perf_counter() - t0
        runs = []
        for _ in range(3):
            batch()
            runs.append(batch.elapsed)
        results["batch_10k"] = min(runs)

        # 2. and 3. a journal of 100,000 events: mostly batches, some hand labels and undos
        big = Path(d) / "big.jsonl"
        with LabelJournal.open(big, labeler="bench") as j:
            for k in range(9):
                j.record_batch(entries(10_000, rng, offset=k), rules_hash="0f" * 32)
            hand = entries(9_000, rng)
            for e in hand:
                e["labeler"] = rng.choice(["ana", "ben"])
            j.record_batch(hand, source="hand")
            for i in range(500):
                j.record(f"run{i:05d}", "beta", content_hash="ab" * 32, reason="hand look")
            for i in range(499):
                j.undo(f"run{i:05d}")
            n_events = j.last_seq + 1
        size_mb = big.stat().st_size / 1e6

        def open_replay() -> None:
            with LabelJournal.open(big, readonly=True) as r:
                r.state()
        results["open_replay_100k"] = best_of(open_replay)
        problems: list = []
        results["verify_100k"] = best_of(lambda: problems.extend(verify_journal(big)))
        assert not problems, problems[:3]

    print(f"journal of {n_events} events, {size_mb:.1f} MB")
    for key, seconds in results.items():
        target = TARGETS[key]
        verdict = "meets target" if seconds < target else "SLOWER THAN TARGET"
        print(f"{key:18s} {seconds:7.3f} s   target < {target:.1f} s   ratio {seconds / target:5.2f}   {verdict}")


if __name__ == "__main__":
    main()
