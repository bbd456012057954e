"""``basinmark origins``: what decides each run's outcome, from its starting conditions at the transition state.

Prints the result in a sentence, its warnings and the coordinates ranked by importance; writes the
starting-condition map (PNG or SVG, drawn as in the window, offscreen when there is no display), the per-run
table as CSV and the whole analysis as JSON.
"""

from __future__ import annotations

import sys
from pathlib import Path

from basinmark.commands._bounds import number, whole
from basinmark.core.errors import SetError

#: permutations of the test of "predictable at all" (each one cross-validates the classifier again)
MAX_PERMUTATIONS = 10000


def register(sub) -> None:
    p = sub.add_parser(
        "origins", help="what decides the outcome: starting conditions at t = 0, a classifier, ranked coordinates",
        description="Take every run's starting conditions at the transition state (monitors and their rates at "
                    "t = 0; with --modes, the displacement, velocity, energy and phase along each normal mode), "
                    "and find how well they predict the outcome (logistic regression, cross-validated, against "
                    "always guessing the commonest outcome, with a permutation test) and which coordinate decides "
                    "it (permutation importance).  Outcomes are the final labels of the journal, else the rules' "
                    "classification made in memory.")
    p.add_argument("set", metavar="SET", help="the set folder")
    p.add_argument("-o", "--output", required=True, metavar="FILE",
                   help="the starting-condition map to write: .png or .svg; the table and the analysis go beside "
                        "it as .csv and .json unless --csv/--json say otherwise")
    p.add_argument("--modes", metavar="FILE", help="the transition state's normal modes (a mode or Hessian file)")
    p.add_argument("--csv", metavar="FILE", help="where to write the per-run table (default: beside the figure)")
    p.add_argument("--json", metavar="FILE", help="where to write the analysis (default: beside the figure)")
    p.add_argument("--x", metavar="COORDINATE", help="coordinate on the horizontal axis (default: the most "
                                                      "informative)")
    p.add_argument("--y", metavar="COORDINATE", help="coordinate on the vertical axis (default: the second)")
    p.add_argument("--with-recrossing", action="store_true",
                   help="count recrossing runs as an outcome of their own (default: compare products only)")
    p.add_argument("--permutations", type=whole(1, MAX_PERMUTATIONS), default=200, metavar="N",
                   help="shuffles of the outcomes for the permutation test (default 200)")
    p.add_argument("--repeats", type=whole(1, 100), default=5, metavar="N",
                   help="repeats of the 5-fold cross-validation with other splits (default 5)")
    p.add_argument("--fixed-c", type=number(0.0, 1e12, above=True), default=None, metavar="C",
                   help="a fixed inverse regularisation strength for the logistic regression (default: chosen in "
                        "every training fold by an inner cross-validation, from 0.01 to 10)")
    p.add_argument("--seed", type=whole(0, 2**31 - 1), default=0, metavar="N", help="seed of the splits and shuffles")
    p.add_argument("--size", default="1000x800", metavar="WxH", help="figure size in pixels (default 1000x800)")
    p.add_argument("--journal", metavar="FILE", help="read this label journal instead of the set's own")
    p.add_argument("--no-cache", action="store_true", help="ignore and do not write the parsed-array cache")
    p.add_argument("--quiet", "-q", action="store_true", help="no progress line on stderr")
    p.set_defaults(func=cmd_origins)


def cmd_origins(args) -> int:
    from basinmark.commands.figures import _open, map_labels
    from basinmark.core.origins import Settings, analyse
    from basinmark.core.origins_report import runs_table, write_analysis_json, write_runs_csv
    from basinmark.core.origins_start import starting_conditions
    from basinmark.core.rules import load_rules
    from basinmark.core.sets import journal_path, rules_path
    from basinmark.gui.figures import _check, parse_size

    size = parse_size(args.size)
    out, _suffix = _check(args.output, size)
    csv_path = Path(args.csv) if args.csv else out.with_suffix(".csv")
    json_path = Path(args.json) if args.json else out.with_suffix(".json")
    tset = _open(args)
    rfile = rules_path(tset.root)
    if not rfile.is_file():
        raise SetError(f"{tset.root}: no rules file {rfile.name}; the outcomes and the monitors come from the rules")
    rules = load_rules(rfile, n_atoms=tset.n_atoms)
    outcome, notes = map_labels(tset, rules, Path(args.journal) if args.journal else journal_path(tset.root))
    start = starting_conditions(tset, rules.monitor_indices())
    if args.modes:
        from basinmark.core.modes import read_modes

        start = start.with_modes(read_modes(args.modes))
    settings = Settings(n_repeats=args.repeats, n_permutations=args.permutations, seed=args.seed, C=args.fixed_c)
    a = analyse(start, outcome, settings, include=("recrossing",) if args.with_recrossing else None)
    names = [f.name for f in a.features]
    for axis in (args.x, args.y):
        if axis is not None and axis not in names:
            raise SetError(f"no coordinate {axis!r}; choose from: {', '.join(names)}")
    from basinmark.gui.figures import ensure_app, save_widget
    from basinmark.gui.origins_view import OriginsCanvas

    ensure_app()
    canvas = OriginsCanvas()
    try:
        canvas.resize(*size)
        canvas.set_analysis(a, rules.products, args.x, args.y)
        save_widget(canvas, out, size)
    finally:
        canvas.close()
        canvas.deleteLater()
    table = runs_table(a, start, outcome)
    write_runs_csv(table, csv_path)
    write_analysis_json(a, json_path, table)
    for line in notes + [n for n in a.notes if n != a.regularisation()]:
        print(f"basinmark: {line}", file=sys.stderr)
    print(a.sentence)
    for w in a.warnings:
        print(f"warning: {w}")
    if a.classified:
        print(a.regularisation())
    if len(a.importance):
        print("\ncoordinates by importance (fall in held-out accuracy when shuffled, mean ± sd):")
        for _, row in a.importance.head(10).iterrows():
            print(f"  {int(row['rank']):>3}  {row['feature']:<44} {row['mean']:+.3f} ± {row['sd']:.3f}")
    print(f"\nmap written to {out}; table of {len(table)} runs to {csv_path}; analysis to {json_path}")
    return 0 if a.classified else 1
