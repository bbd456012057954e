"""``basinmark info SET``: what a set holds, run by run, and what failed to load."""

from __future__ import annotations

import time

from basinmark.commands._output import add_format_option, emit, progress_printer


def register(sub) -> None:
    p = sub.add_parser("info", help="list the runs of a set: frames, time span, atoms, energy drift, problems",
                       description="Open a set folder and print one row per run (and per file that failed).")
    p.add_argument("set", metavar="SET", help="the set folder")
    p.add_argument("--no-cache", action="store_true", help="ignore and do not write the parsed-array cache")
    p.add_argument("--quiet", "-q", action="store_true", help="no progress line on stderr")
    add_format_option(p)
    p.set_defaults(func=run)


def run(args) -> int:
    from basinmark.core.sets import open_set

    t0 = time.perf_counter()
    tset = open_set(args.set, progress=progress_printer(args.quiet), use_cache=not args.no_cache)
    elapsed = time.perf_counter() - t0
    emit(tset.info_table(), args.format)
    if args.format == "table":
        n_frames = sum(t.n_frames for t in tset)
        print(f"\n{tset.name}: {len(tset)} runs loaded ({n_frames} frames) in {elapsed:.2f} s; "
              f"{len(tset.failures)} file(s) not loaded, {len(tset.left_out)} left out.")
        for note in tset.notes:
            print(f"  found: {note}")
        for f in tset.left_out:
            print(f"  left out: {f}")
        for f in tset.failures:
            print(f"  not loaded: {f}")
        for w in tset.warnings:
            print(f"  warning: {w}")
    return 1 if (len(tset) == 0) else 0
