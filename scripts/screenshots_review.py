"""Render the window at 1366×768 with the Review, Rules and Sensitivity views in front, offscreen.

The set is copied to a temporary folder and given demo labels there (automatic labels from its rules,
then two invented labelers, "labeler-a" and "labeler-b", who hand-label the same runs and disagree on
a few), so nothing is written into the source tree.  Usage::

    QT_QPA_PLATFORM=offscreen python scripts/screenshots_review.py [--set FOLDER] [--out DIR] [--size 1366x768]
"""

from __future__ import annotations

import sys
import tempfile
from pathlib import Path

from _shots import close, copy_set, open_window, parse_args, save, settle, show_view  # scripts/ is on sys.path when run


def demo_labels(root: Path, n_runs: int = 60, seed: int = 11) -> None:
    """Automatic labels, then two hand labelers over the first ``n_runs`` runs (B differs on some)."""
    import numpy as np

    from basinmark.core.classify import classify_set, write_automatic_labels
    from basinmark.core.journal import LabelJournal
    from basinmark.core.labels import all_labels
    from basinmark.core.rules import load_rules
    from basinmark.core.sets import journal_path, open_set, rules_path

    tset = open_set(root)
    rules = load_rules(rules_path(root), n_atoms=tset.n_atoms)
    table = classify_set(tset, rules)
    rng = np.random.default_rng(seed)
    alt = {p: [q for q in rules.products if q != p] + ["recrossing"] for p in rules.products}
    with LabelJournal.open(journal_path(root), labeler="demo", allowed=all_labels(rules)) as j:
        write_automatic_labels(j, table, rules)
        for row in table.head(n_runs).itertuples(index=False):
            a = row.outcome
            j.record(row.run, a, content_hash=row.content_hash, labeler="labeler-a",
                     reason="" if a != "unfinished" else "still between basins at the end")
            b = a
            if rng.random() < 0.15:
                b = str(rng.choice(alt.get(a, ["ambiguous"])))
            j.record(row.run, b, content_hash=row.content_hash, labeler="labeler-b",
                     reason="looks like it turns back" if b == "recrossing" and a != b else "")


def render(set_path: Path, out_dir: Path, size: tuple[int, int]) -> list[Path]:
    from PySide6.QtCore import QEventLoop, QTimer

    written = []
    with tempfile.TemporaryDirectory(prefix="basinmark-shot-") as tmp:
        work = copy_set(set_path, Path(tmp))
        demo_labels(work)
        app, win = open_window(work, Path(tmp), size, labeler="reviewer")

        panel = win.review_panel
        show_view(app, win, "review")
        panel.refresh_sources()
        panel.set_sources(("person", "labeler-a"), ("person", "labeler-b"))
        panel.reviewer.setText("reviewer")
        panel.compare()
        panel.queue_view.selectRow(0)
        settle(app)
        written.append(save(win, out_dir / "review.png"))

        show_view(app, win, "rules")
        ed = win.rules_editor
        loop = QEventLoop()
        ed.reclassified.connect(loop.quit)
        QTimer.singleShot(20_000, loop.quit)
        # a live edit: the alpha basin's r_b limit moved a little
        for r in range(ed.conditions.rowCount()):
            if ed.conditions.item(r, 0).text() == "alpha" and ed.conditions.cellWidget(r, 1).currentText() == "r_b":
                ed.conditions.item(r, 3).setText("2.05")
        loop.exec()
        settle(app)
        written.append(save(win, out_dir / "rules.png"))

        # the sensitivity of the alpha:beta ratio to the alpha basin's r_b limit, swept in the background
        show_view(app, win, "sensitivity")
        view = win.sweep_view
        view.basin.setCurrentText("alpha")
        view.monitor.setCurrentText("r_b")
        loop = QEventLoop()
        view.finished.connect(loop.quit)
        QTimer.singleShot(120_000, loop.quit)
        if view.run() is not None:
            loop.exec()
        settle(app)
        written.append(save(win, out_dir / "sensitivity.png"))
        close(app, win)
    return written


def main(argv: list[str] | None = None) -> int:
    args = parse_args(__doc__, argv)
    if not (args.set / "basins.toml").is_file():
        print(f"screenshots_review: {args.set}: not a set folder with basins.toml", file=sys.stderr)
        return 2
    render(args.set, args.out, args.size_px)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
