"""The ``basinmark`` command line.

Each sub-command lives in a module of :mod:`basinmark.commands` that exposes
``register(subparsers)``; this file only builds the parser and turns our own
errors into a one-line message and a non-zero exit code.
"""

from __future__ import annotations

import argparse
import importlib
import pkgutil
import sys

from basinmark import __version__
from basinmark.core.errors import BasinmarkError


def build_parser() -> argparse.ArgumentParser:
    import basinmark.commands as commands

    parser = argparse.ArgumentParser(
        prog="basinmark",
        description="Classify, inspect, hand-label and count the runs of a reaction-dynamics set.",
    )
    parser.add_argument("--version", action="version", version=f"basinmark {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    for info in sorted(pkgutil.iter_modules(commands.__path__), key=lambda m: m.name):
        if info.name.startswith("_"):
            continue
        module = importlib.import_module(f"basinmark.commands.{info.name}")
        module.register(sub)
    return parser


def main(argv: list[str] | None = None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    if not getattr(args, "func", None):
        parser.print_help()
        return 2
    try:
        return int(args.func(args) or 0)
    except BasinmarkError as exc:
        print(f"basinmark: error: {exc}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print("basinmark: interrupted", file=sys.stderr)
        return 130
    except BrokenPipeError:
        return 0


if __name__ == "__main__":  # pragma: no cover
    raise SystemExit(main())
