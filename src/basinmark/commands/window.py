"""``basinmark open [SET]``: the desktop window."""

from __future__ import annotations

import argparse
import os
import sys
from pathlib import Path

from basinmark.core.errors import BasinmarkError, SetError


def _check_display() -> None:
    """On Linux without any display Qt aborts the process; say what to do instead."""
    if not sys.platform.startswith("linux") or os.environ.get("QT_QPA_PLATFORM"):
        return
    if not (os.environ.get("DISPLAY") or os.environ.get("WAYLAND_DISPLAY")):
        raise BasinmarkError("no display to open the window on (DISPLAY and WAYLAND_DISPLAY are unset); "
                             "use ssh -X, or the headless commands (basinmark classify, summary, label, ...)")


def register(subparsers) -> None:
    p = subparsers.add_parser("open", help="open a set in the desktop window",
                              description="Open a set folder in the desktop window (default: the bundled "
                                          "sample set).")
    p.add_argument("set", nargs="?", default=None, metavar="SET",
                   help="folder of runs (default: the bundled sample set)")
    p.add_argument("--rules", metavar="FILE", default=None,
                   help="rules file to classify with (default: basins.toml in the set folder)")
    p.add_argument("--labeler", metavar="NAME", default=None,
                   help="name recorded with your hand labels (default: the remembered name, else your login)")
    p.set_defaults(func=_run)


def _run(args: argparse.Namespace) -> int:
    from basinmark.gui.app import bundled_sample_set, run

    path = Path(args.set).expanduser() if args.set else bundled_sample_set()
    if not path.is_dir():
        raise SetError(f"{path}: no such folder (give a folder of runs, or omit SET for the sample set)")
    if args.rules and not Path(args.rules).is_file():
        raise SetError(f"{args.rules}: no such rules file")
    _check_display()
    return run(path, args.rules, args.labeler)
