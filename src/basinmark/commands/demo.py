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
    summary = generate(args.out, runs=args.runs, seed=seed, temperature=args.temperature,
                       progress=progress, settings=settings)
    counts = summary.counts()
    table = pd.DataFrame({"ends": list(counts), "runs": [counts[k] for k in counts]})
    if args.format == "table":
        print("\n".join(summary.report_lines()))
    else:
        emit(table, args.format)
    return 0
