"""What the screenshot scripts share: the repository root and their command line."""

from __future__ import annotations

import argparse
import os
import sys

# a screenshot script closes windows whose rules it changed: answer the unsaved-rules question with
# Discard instead of waiting for a person
os.environ.setdefault("BASINMARK_UNSAVED_RULES", "discard")
from pathlib import Path

REPO = Path(__file__).resolve().parents[1]


def parse_args(doc: str, argv: list[str] | None, size: str | None = None) -> argparse.Namespace:
    """``--set`` (default: the bundled sample set), ``--out`` and, when ``size`` is given, ``--size WxH``
    (returned as ``args.size_px``)."""
    sys.path.insert(0, str(REPO / "src"))
    from basinmark.gui.app import bundled_sample_set

    ap = argparse.ArgumentParser(description=doc.splitlines()[0])
    ap.add_argument("--set", type=Path, default=bundled_sample_set(), help="set folder (default: bundled sample)")
    ap.add_argument("--out", type=Path, default=REPO / "docs" / "screenshots", help="output folder")
    if size is not None:
        ap.add_argument("--size", default=size, help="window size WxH in pixels")
    args = ap.parse_args(argv)
    if size is not None:
        args.size_px = tuple(int(x) for x in args.size.lower().split("x"))
    return args
