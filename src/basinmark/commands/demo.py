"""``basinmark make-demo OUT``: regenerate a demo set on the model surface."""

from __future__ import annotations

import sys

import pandas as pd

from basinmark.commands._bounds import MAX_DEMO_RUNS, MAX_DEMO_TIME_FS, number, whole
from basinmark.commands._output import add_format_option, emit


def register(subparsers) -> None:
    p = subparsers.add_parser(
        "make-demo",
        help="generate a demo set (runs on basinmark's own model surface) into a folder",
        description="Generate a demo set: quasiclassical runs from the one transition state of basinmark's "
                    "invented model surface, written as gzipped extended XYZ halves, with basins.toml and README.md.",
    )
    p.add_argument("out", metavar="OUT", help="folder to write (created if missing)")
    p.add_argument("--runs", type=whole(1, MAX_DEMO_RUNS), default=200,
                   help=f"number of runs, 1 to {MAX_DEMO_RUNS} (default: 200)")
    p.add_argument("--seed", type=int, default=None, help="random seed (default: the bundled set's seed)")
    p.add_argument("--temperature", type=number(0.0, 5000.0, above=True), default=298.15,
                   help="temperature in K (default: 298.15)")
    p.add_argument("--max-time", type=number(0.0, MAX_DEMO_TIME_FS, above=True), default=None, metavar="FS",
                   help=f"longest half in fs, at most {MAX_DEMO_TIME_FS:g} (default: 400)")
    p.add_argument("--velocities", action="store_true",
                   help="also write each frame's velocities (Å/fs) as a vel column of the extended XYZ files")
    p.add_argument("--phase-decides", action="store_true",
                   help="make a set whose outcome is decided by one normal mode's starting phase (that mode gets "
                        "a fixed energy at a random phase, the others almost none; not quasiclassical, the "
                        "temperature is not used); writes velocities and the TS's modes as ts-modes.toml")
    p.add_argument("--phase-mode", type=whole(2, 3 * 12 - 6), default=None, metavar="N",
                   help="with --phase-decides: the deciding mode, 2 to 30, numbered from 1 by frequency (the imaginary "
                        "mode is 1); default: the mode that steers runs across the ridge most")
    p.add_argument("--force", action="store_true",
                   help="write into a folder that already holds runs (its old run files are removed first)")
    add_format_option(p)
    p.set_defaults(func=run)


def run(args) -> int:
    from dataclasses import replace

    from basinmark.demo.generate import DEFAULT_SEED, DemoSettings, generate

    if args.runs < 1:
        print("basinmark: error: --runs must be at least 1", file=sys.stderr)
        return 2
    if args.phase_mode is not None and not args.phase_decides:
        print("basinmark: error: --phase-mode needs --phase-decides", file=sys.stderr)
        return 2
    phase = None
    if args.phase_decides:
        from basinmark.demo.phase_set import PhaseSettings

        phase = PhaseSettings(mode=args.phase_mode)
    settings = DemoSettings()
    if args.max_time is not None:
        if args.max_time <= 0:
            print("basinmark: error: --max-time must be positive", file=sys.stderr)
            return 2
        settings = replace(settings, max_time_fs=args.max_time)

    steps = {1: "backward halves propagated", 2: "forward halves propagated", 3: "files written"}

    def progress(done: int, total: int) -> None:
        print(f"  {steps.get(done, done)} ({done}/{total})", file=sys.stderr)

    from pathlib import Path

    old = sorted((Path(args.out) / "runs").glob("*.*.xyz.gz")) if (Path(args.out) / "runs").is_dir() else []
    if old and not args.force:
        print(f"basinmark: error: {args.out} already holds {len(old)} run files; a new demo set there would mix "
              "with them. Choose an empty folder, or add --force to replace them.", file=sys.stderr)
        return 2
    for f in old:  # --force: the old runs go, so the folder holds exactly the new set
        f.unlink()
    seed = DEFAULT_SEED if args.seed is None else args.seed
    try:
        summary = generate(args.out, runs=args.runs, seed=seed, temperature=args.temperature,
                           progress=progress, settings=settings, velocities=args.velocities, phase=phase)
    except ValueError as exc:  # a deciding mode that cannot decide (the imaginary one, or beyond the last)
        print(f"basinmark: error: {exc}", file=sys.stderr)
        return 2
    counts = summary.counts()
    table = pd.DataFrame({"ends": list(counts), "runs": [counts[k] for k in counts]})
    if args.format == "table":
        print("\n".join(summary.report_lines()))
        if summary.decide_mode is not None:
            line = f"  deciding mode: {summary.decide_mode} (phases in generator-record.csv; modes in ts-modes.toml)"
            if summary.arc is not None:
                line += f"; one arc of its phase predicts {summary.arc[2]:.1%} of the product runs"
            print(line)
    else:
        emit(table, args.format)
    return 0
