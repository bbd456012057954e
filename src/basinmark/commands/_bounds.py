"""Bounds on the work asked for on the command line, checked while the arguments are read.

Each ``type=`` below turns a value outside its range into argparse's usual one-line error (exit code 2)
stating the allowed range, before any file is read.  The limits are our own, set well past any real
use so that a slip of the finger (``--steps 1000000``) is refused at once instead of running for
minutes (common practice, no source).
"""

from __future__ import annotations

import argparse
import math

#: a threshold sweep: values per sweep (each value classifies the whole set again)
MAX_SWEEP_STEPS = 1000
#: a movie: frames rendered (choose a part of a longer run with --frames A:B)
MAX_MOVIE_FRAMES = 5000
#: a demo set: runs integrated, and the longest half in fs
MAX_DEMO_RUNS = 10000
MAX_DEMO_TIME_FS = 20000.0


def whole(lo: int, hi: int):
    """An argparse type: a whole number from ``lo`` to ``hi`` (both included)."""
    def parse(text: str) -> int:
        try:
            value = int(text)
        except ValueError:
            raise argparse.ArgumentTypeError(f"{text!r} is not a whole number (allowed: {lo} to {hi})") from None
        if not lo <= value <= hi:
            raise argparse.ArgumentTypeError(f"{value} is outside the allowed range {lo} to {hi}")
        return value

    parse.__name__ = "whole number"
    return parse


def number(lo: float | None = None, hi: float | None = None, *, above: bool = False):
    """An argparse type: a finite number, at least ``lo`` (more than ``lo`` when ``above``) and at most ``hi``."""
    if lo is None and hi is None:
        allowed = "any finite number"
    elif hi is None:
        allowed = f"{'more than' if above else 'at least'} {lo:g}"
    elif lo is None:
        allowed = f"at most {hi:g}"
    else:
        allowed = f"{'more than ' if above else ''}{lo:g} to {hi:g}"

    def parse(text: str) -> float:
        try:
            value = float(text)
        except ValueError:
            raise argparse.ArgumentTypeError(f"{text!r} is not a number (allowed: {allowed})") from None
        if not math.isfinite(value) or (lo is not None and (value <= lo if above else value < lo)) or (
                hi is not None and value > hi):
            raise argparse.ArgumentTypeError(f"{text} is outside the allowed range: {allowed}")
        return value

    parse.__name__ = "number"
    return parse
