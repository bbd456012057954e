"""``basinmark map``, ``export-summary`` and ``export-run``: the window's exports without a window.

``map`` draws the same figure as the window's map of all runs (offscreen when there is no display);
``export-summary`` writes the summary of ``basinmark summary`` to a Markdown or CSV file;
``export-run`` writes one run, or one frame of it, as extended XYZ.
"""

from __future__ import annotations

import sys
from pathlib import Path

from basinmark.core.errors import SetError


def _set_options(p, *, journal: bool = True) -> None:
    p.add_argument("set", metavar="SET", help="the set folder")
    if journal:
        p.add_argument("--journal", metavar="FILE", help="read this label journal instead of the set's own")
    p.add_argument("--no-cache", action="store_true", help="ignore and do not write the parsed-array cache")
    p.add_argument("--quiet", "-q", action="store_true", help="no progress line on stderr")


def register(sub) -> None:
    p = sub.add_parser(
        "map", help="draw every run as a path on two monitors, coloured by its label, to PNG or SVG",
        description="Draw the map of all runs of a set: each run a path on the plane of two monitors of the rules, "
                    "coloured by its final label (from the journal, else classified in memory), with the basins "
                    "shaded.  Works without a display.")
    _set_options(p)
    p.add_argument("-o", "--output", required=True, metavar="FILE", help="the figure to write: .png or .svg")
    p.add_argument("--x", metavar="MONITOR", help="monitor on the horizontal axis (default: the rules' first)")
    p.add_argument("--y", metavar="MONITOR", help="monitor on the vertical axis (default: the rules' second)")
    p.add_argument("--size", default="1000x800", metavar="WxH", help="figure size in pixels (default 1000x800)")
    p.add_argument("--title", metavar="TEXT", help="a title above the plot")
    p.set_defaults(func=cmd_map)

    p = sub.add_parser(
        "export-summary", help="write the summary (counts, ratio, TST comparison, warnings) to .md or .csv",
        description="Write the report of `basinmark summary` to a file: Markdown (.md, with the warnings) or a "
                    "tidy CSV table (.csv; the warnings are printed).")
    _set_options(p)
    p.add_argument("-o", "--output", required=True, metavar="FILE", help="the file to write: .md or .csv")
    from basinmark.commands.summary import add_tst_options

    p.add_argument("--ratio", nargs=2, metavar=("A", "B"), help="the two products to compare (default: the two most common)")
    add_tst_options(p)
    p.add_argument("--method", choices=("wilson", "exact"), default="wilson", help="interval method (default wilson)")
    p.add_argument("--confidence", type=float, default=0.95, metavar="C", help="confidence level (default 0.95)")
    p.add_argument("--half-width", type=float, default=0.05, metavar="H",
                   help="target ± half-width for the runs-needed estimate (default 0.05)")
    p.add_argument("--no-recheck", dest="recheck", action="store_false",
                   help="with journal labels, skip classifying again in memory")
    p.set_defaults(func=cmd_export_summary)

    p = sub.add_parser(
        "export-run", help="write one run (or one frame of it) as extended XYZ",
        description="Write a run of a set as one extended XYZ file (backward half at negative times, keys time, "
                    "epot, ekin), or a single frame of it with --frame.")
    _set_options(p, journal=False)
    p.add_argument("run", metavar="RUN", help="the run id (as `basinmark info SET` lists them)")
    p.add_argument("-o", "--output", required=True, metavar="FILE", help="the .xyz file to write")
    p.add_argument("--frame", type=int, metavar="N", help="only frame N (1-based; negative counts from the end)")
    p.set_defaults(func=cmd_export_run)


def _open(args):
    from basinmark.commands._output import progress_printer
    from basinmark.core.sets import open_set

    root = Path(args.set)
    if not root.is_dir():
        raise SetError(f"{root}: not a folder (a set is a folder of runs)")
    tset = open_set(root, progress=progress_printer(args.quiet), use_cache=not args.no_cache)
    if not len(tset):
        raise SetError(f"{root}: no runs could be loaded")
    return tset


def map_labels(tset, rules, journal: Path) -> tuple[dict[str, str], list[str]]:
    """Final labels by run (journal, else classified in memory with ``rules``) and notes on where they came from."""
    from basinmark.commands.summary import NOT_CLASSIFIED_NOTE, classify_in_memory, journal_labels

    state, notes = journal_labels(journal, dict(tset.content_hashes()))
    if state is not None:
        labels = {str(r): str(f) for r, f in zip(state["run"], state["final_label"]) if isinstance(f, str)}
        missing = [r for r in tset.run_ids if r not in labels]
        if missing:
            notes.append(f"{len(missing)} run(s) have no label in the journal and are drawn as 'no label'")
        return labels, notes
    classified = classify_in_memory(tset, rules)
    return dict(zip(classified["run"], classified["outcome"])), [NOT_CLASSIFIED_NOTE] + classified.attrs["notes"]


def cmd_map(args) -> int:
    from basinmark.core.rules import load_rules
    from basinmark.core.sets import journal_path, rules_path
    from basinmark.gui.figures import parse_size, save_map

    size = parse_size(args.size)
    tset = _open(args)
    rfile = rules_path(tset.root)
    if not rfile.is_file():
        raise SetError(f"{tset.root}: no rules file {rfile.name}; the map needs the rules' monitors")
    rules = load_rules(rfile, n_atoms=tset.n_atoms)
    labels, notes = map_labels(tset, rules, Path(args.journal) if args.journal else journal_path(tset.root))
    out = save_map(tset, rules, labels, args.output, args.x, args.y, size, args.title)
    for line in notes:
        print(f"basinmark: {line}", file=sys.stderr)
    print(f"map of {len(tset)} runs written to {out} ({size[0]}x{size[1]} px)")
    return 0


def cmd_export_summary(args) -> int:
    from basinmark.commands.summary import make_summary
    from basinmark.core.report import write_summary

    summary = make_summary(args)
    out = write_summary(summary, args.output)
    if out.suffix.lower() != ".md":  # the Markdown carries them; say them for the other forms
        for line in summary.notes + summary.warnings:
            print(f"basinmark: {line}", file=sys.stderr)
    print(f"summary of {summary.n_runs} runs written to {out}")
    return 0 if summary.n_counted > 0 else 1


def cmd_export_run(args) -> int:
    from basinmark.core.report import write_run_xyz

    tset = _open(args)
    if args.run not in tset:
        raise SetError(f"{tset.root}: no run {args.run!r}; `basinmark info {args.set}` lists the runs")
    traj = tset[args.run]
    frame = None
    if args.frame is not None:
        if args.frame == 0 or not -traj.n_frames <= args.frame <= traj.n_frames:
            raise SetError(f"run {args.run} has frames 1 to {traj.n_frames}; --frame {args.frame} does not exist")
        frame = args.frame - 1 if args.frame > 0 else traj.n_frames + args.frame
    out = write_run_xyz(traj, args.output, frame)
    what = f"frame {frame + 1} of run {args.run}" if frame is not None else f"run {args.run} ({traj.n_frames} frames)"
    print(f"{what} written to {out}")
    return 0
