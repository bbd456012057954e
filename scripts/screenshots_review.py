"""Render the Review and Rules docks on the sample set to PNG, offscreen.

The set is copied to a temporary folder and given demo labels there (automatic labels from its rules,
then two invented labelers, "labeler-a" and "labeler-b", who hand-label the same runs and disagree on
a few), so nothing is written into the source tree.  Usage::

    QT_QPA_PLATFORM=offscreen python scripts/screenshots_review.py [--set FOLDER] [--out DIR] [--size 1500x950]
"""

from __future__ import annotations

import os
import shutil
import sys
import tempfile
from pathlib import Path

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")

from _shots import parse_args  # noqa: E402  (scripts/ is on sys.path when run)


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
    from PySide6.QtCore import QEventLoop, QSettings, Qt, QTimer

    from basinmark.gui.app import make_app

    app = make_app()
    from basinmark.gui.main_window import MainWindow
    from basinmark.gui.review_view import install_review_dock
    from basinmark.gui.rules_editor import install_rules_editor

    written = []
    with tempfile.TemporaryDirectory(prefix="basinmark-shot-") as tmp:
        work = Path(tmp) / set_path.name
        shutil.copytree(set_path, work, ignore=shutil.ignore_patterns(".basinmark-cache", "basinmark-labels.*"))
        demo_labels(work)
        win = MainWindow(QSettings(str(Path(tmp) / "settings.ini"), QSettings.Format.IniFormat))
        review = install_review_dock(win)
        rules = install_rules_editor(win)
        win.label_panel.set_labeler("reviewer")
        win.resize(*size)
        win.show()
        loop = QEventLoop()
        win.set_loaded.connect(loop.quit)
        QTimer.singleShot(120_000, loop.quit)
        win.open_set(work)
        loop.exec()
        if win.failure_dialog is not None:
            win.failure_dialog.close()
        out_dir.mkdir(parents=True, exist_ok=True)

        panel = win.review_panel
        review.toggleViewAction().trigger()
        panel.refresh_sources()
        panel.set_sources(("person", "labeler-a"), ("person", "labeler-b"))
        panel.reviewer.setText("reviewer")
        panel.compare()
        panel.queue_view.selectRow(0)
        win.resizeDocks([review], [760], Qt.Orientation.Horizontal)
        for _ in range(8):
            app.processEvents()
        path = out_dir / "review.png"
        win.grab().save(str(path))
        written.append(path)

        rules.toggleViewAction().trigger()
        ed = win.rules_editor
        loop = QEventLoop()
        ed.reclassified.connect(loop.quit)
        QTimer.singleShot(20_000, loop.quit)
        # a live edit: the alpha basin's r_b limit moved a little
        for r in range(ed.conditions.rowCount()):
            if ed.conditions.item(r, 0).text() == "alpha" and ed.conditions.cellWidget(r, 1).currentText() == "r_b":
                ed.conditions.item(r, 3).setText("2.05")
        loop.exec()
        win.resizeDocks([rules], [760], Qt.Orientation.Horizontal)
        for _ in range(8):
            app.processEvents()
        path = out_dir / "rules.png"
        win.grab().save(str(path))
        written.append(path)
        win.close()
    return written


def main(argv: list[str] | None = None) -> int:
    args = parse_args(__doc__, argv, size="1500x950")
    w, h = args.size_px
    if not (args.set / "basins.toml").is_file():
        print(f"screenshots_review: {args.set}: not a set folder with basins.toml", file=sys.stderr)
        return 2
    for p in render(args.set, args.out, (w, h)):
        print(p)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
