"""``basinmark init FOLDER``: look at a folder of runs, say what was found, write a manifest and proposed rules."""

from __future__ import annotations

from basinmark.commands._output import progress_printer


def register(sub) -> None:
    p = sub.add_parser(
        "init", help="inspect a folder of runs; write a commented manifest and proposed rules to check",
        description="Open a folder of runs without rules and show what was found: how the runs were paired, the "
                    "comment-line keys and likely units, the atoms with their numbers, the bonds of the "
                    "transition-state frame. Writes a commented basinmark-set.toml and basins.proposed.toml "
                    "(monitors and thresholds chosen from the runs' ends, each with a comment saying how). "
                    "Nothing is classified on the proposed rules until they are accepted with --accept.")
    p.add_argument("set", metavar="FOLDER", help="the folder of runs")
    p.add_argument("--accept", action="store_true",
                   help="make the (checked, edited) basins.proposed.toml the set's basins.toml")
    p.add_argument("--dry-run", action="store_true", help="only report; write no file")
    p.add_argument("--force", action="store_true", help="write over an existing manifest, proposal or rules file")
    p.add_argument("--quiet", "-q", action="store_true", help="no progress line on stderr")
    p.set_defaults(func=run)


def run(args) -> int:
    from basinmark.core.init_files import accept_proposal, report_text, write_files
    from basinmark.core.init_inspect import inspect_folder

    if args.accept:
        path = accept_proposal(args.set, force=args.force)
        print(f"Accepted: {path} now holds the rules; `basinmark classify {args.set}` records the outcomes.")
        return 0
    findings = inspect_folder(args.set, progress=progress_printer(args.quiet, "reading"))
    written, kept = ([], []) if args.dry_run else write_files(findings, force=args.force)
    print(report_text(findings, written), end="")
    for k in kept:
        print(f"Kept: {k}")
    return 0 if len(findings.tset) else 1
