"""The ``basinmark`` command line.

Each sub-command lives in a module of :mod:`basinmark.commands` that exposes
``register(subparsers)``; this file only builds the parser and turns our own
errors into a one-line message and a non-zero exit code.  A command that read a damaged label
journal prints what it could (labels as of the journal's last good event), then says so at the end
and exits with :data:`DAMAGED_EXIT`.
"""

from __future__ import annotations

import argparse
import importlib
import pkgutil
import sys
from pathlib import Path

from basinmark import __version__
from basinmark.core.errors import BasinmarkError


#: exit code of a command whose output comes from a damaged label journal (as of its last good event)
DAMAGED_EXIT = 3

#: commands with a SET argument that may be given a folder without runs: ``init`` inspects any folder of
#: files, ``open`` leaves it to the window (which says so itself).  Every other command with a SET argument
#: first checks that the folder is a set, so that nothing is written into a folder that is not one.
ANY_FOLDER = frozenset({"init", "open"})


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
    try:
        args = parser.parse_args(argv)
    except SystemExit as stop:  # a bad argument (argparse printed why: usage and the allowed range), --help
        return stop.code if isinstance(stop.code, int) else 2
    if not getattr(args, "func", None):
        parser.print_help()
        return 2
    from basinmark.core.journal_check import take_damage_reports

    take_damage_reports()
    try:
        if getattr(args, "set", None) and args.command not in ANY_FOLDER and Path(args.set).expanduser().is_dir():
            from basinmark.core.not_a_set import require_set

            require_set(args.set)  # NotASetError: nothing is written into a folder without runs
        code = int(args.func(args) or 0)
    except BasinmarkError as exc:
        print(f"basinmark: error: {exc}", file=sys.stderr)
        take_damage_reports()  # the error says enough
        return 2
    except BrokenPipeError:
        return 0
    except OSError as exc:
        # a safety net: the places that write files say which file and what to do themselves; anything
        # that still gets here is said in one sentence rather than as a traceback
        from basinmark.core.fs_errors import reason_and_advice

        reason, hint = reason_and_advice(exc)
        where = " and ".join(str(f) for f in (exc.filename, exc.filename2) if f) or "a file"
        print(f"basinmark: error: {where}: {reason}; {hint}", file=sys.stderr)
        take_damage_reports()
        return 2
    except KeyboardInterrupt:
        print("basinmark: interrupted", file=sys.stderr)
        return 130
    # a command that read a damaged label journal says so last, loudly, and does not exit 0
    for text in take_damage_reports().values():
        print(f"\nbasinmark: DAMAGED LABEL JOURNAL: {text}", file=sys.stderr)
        code = code or DAMAGED_EXIT
    return code


if __name__ == "__main__":  # pragma: no cover
    raise SystemExit(main())
