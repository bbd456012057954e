"""Media commands: ``basinmark movie`` (one run as an animated GIF) and ``basinmark review`` (a Markdown
report of two labelers' agreement).

``review`` takes A and B exactly as ``basinmark compare`` does (two journals or set folders, or one
with ``--labelers X Y``) and hands the work to that command, so both always agree.
"""

from __future__ import annotations

import os
import sys
from dataclasses import replace
from pathlib import Path

from basinmark.commands._bounds import MAX_MOVIE_FRAMES, number
from basinmark.core.errors import BasinmarkError


def register(sub) -> None:
    p = sub.add_parser("movie", help="write one run as an animated GIF (molecule beside the traces)",
                       description="Render one run of a set, the molecule beside its traces with a moving "
                                   "time cursor, into an animated GIF (or MP4 when imageio-ffmpeg is "
                                   "installed). Works without a display.")
    p.add_argument("set", metavar="SET", help="the set folder")
    p.add_argument("run", metavar="RUN", help="run id")
    p.add_argument("-o", "--output", metavar="FILE", required=True, help="the movie file (.gif, or .mp4)")
    p.add_argument("--fps", type=number(0.0, 100.0, above=True), default=20.0,
                   help="frames per second, at most 100 (default: 20)")
    p.add_argument("--size", default="640x480", metavar="WxH", help="width x height in pixels (default: 640x480)")
    p.add_argument("--frames", metavar="A:B", default=None,
                   help="only frames A to B, numbered from 1, both included (default: all)")
    p.add_argument("--rules", metavar="FILE", default=None,
                   help="rules file for thresholds, basin band and commit marks (default: the set's basins.toml)")
    p.add_argument("--energy-unit", choices=("kcal/mol", "kJ/mol"), default="kcal/mol",
                   help="unit of the energy trace (default: kcal/mol)")
    p.add_argument("--measure", action="append", default=[], metavar="A-B[-C[-D]]",
                   help="also trace this distance (2 atoms), angle (3) or dihedral (4), atoms numbered from 1, "
                        "and write its value on the molecule; may be given several times")
    p.add_argument("--no-cache", action="store_true", help="ignore and do not write the parsed-array cache")
    p.set_defaults(func=cmd_movie)

    p = sub.add_parser("review", help="agreement of two labelers as a Markdown report",
                       description="Compare two labelers as 'basinmark compare' does (two journals or set "
                                   "folders, or one with --labelers X Y) and write the review as a short "
                                   "Markdown report.")
    p.add_argument("a", metavar="A", help="a journal file or a set folder")
    p.add_argument("b", metavar="B", nargs="?", help="a second journal file or set folder")
    p.add_argument("-o", "--output", metavar="FILE", required=True, help="the Markdown report to write")
    p.add_argument("--labelers", nargs=2, metavar=("X", "Y"),
                   help="compare two labelers of A's journal: auto, hand, final or labeler names")
    p.add_argument("--use", choices=("final", "auto", "hand"), default="final",
                   help="with two journals, which label of each run to compare (default: final)")
    p.add_argument("--confidence", type=float, default=0.95, help="confidence level of the kappa interval")
    p.add_argument("--format", choices=("table", "json"), default="table",
                   help="what to print besides writing the report (default: table)")
    p.set_defaults(func=cmd_review)


def cmd_review(args) -> int:
    from basinmark.commands.labels import cmd_compare

    out = Path(args.output)
    if not out.parent.is_dir():
        raise BasinmarkError(f"cannot write {out}: the folder does not exist")
    return cmd_compare(args)


def ensure_gui_platform() -> None:
    """Use Qt's offscreen platform when no display is available (before any QApplication exists)."""
    if os.environ.get("QT_QPA_PLATFORM"):
        return
    if sys.platform.startswith("linux") and not (os.environ.get("DISPLAY") or os.environ.get("WAYLAND_DISPLAY")):
        os.environ["QT_QPA_PLATFORM"] = "offscreen"


def load_one_run(root: Path, run_id: str, *, use_cache: bool = True):
    """Load only ``run_id`` of the set at ``root`` (the other runs are not read)."""
    from basinmark.core.model import LoadFailure
    from basinmark.core.sets import discover, iter_runs

    plan = discover(root)
    specs = [s for s in plan.runs if s.run_id == run_id]
    if not specs:
        known = [s.run_id for s in plan.runs]
        hint = f"; runs are e.g. {', '.join(known[:5])}" if known else "; the folder holds no runs"
        raise BasinmarkError(f"{root}: no run {run_id!r}{hint}")
    for _spec, result in iter_runs(replace(plan, runs=specs), use_cache=use_cache, workers=1):
        if isinstance(result, LoadFailure):
            raise BasinmarkError(f"run {run_id} could not be loaded: {result}")
        return result
    raise BasinmarkError(f"run {run_id} could not be loaded")  # pragma: no cover (iter_runs yields once)


def parse_measure(text: str, n_atoms: int) -> tuple[int, ...]:
    """``"5-4"`` -> (5, 4): 2 to 4 different atom numbers from 1 to ``n_atoms``."""
    try:
        atoms = tuple(int(a) for a in str(text).replace(",", "-").split("-"))
    except ValueError:
        raise BasinmarkError(f"--measure {text!r} is not atom numbers joined by '-', e.g. 5-4 or 1-2-3") from None
    if not 2 <= len(atoms) <= 4 or len(set(atoms)) != len(atoms):
        raise BasinmarkError(f"--measure {text!r} needs 2, 3 or 4 different atoms (distance, angle, dihedral)")
    if not all(1 <= a <= n_atoms for a in atoms):
        raise BasinmarkError(f"--measure {text!r}: atoms are numbered 1 to {n_atoms} in this run")
    return atoms


def cmd_movie(args) -> int:
    from basinmark.core.classify import classify_run
    from basinmark.core.rules import load_rules
    from basinmark.core.sets import rules_path
    from basinmark.gui.movie import export_movie, movie_format, parse_frames, parse_size

    root = Path(args.set).expanduser()
    if not root.is_dir():
        raise BasinmarkError(f"{root}: no such set folder")
    movie_format(args.output)
    size = parse_size(args.size)
    traj = load_one_run(root, args.run, use_cache=not args.no_cache)
    frames = parse_frames(args.frames, traj.n_frames)
    measures = [parse_measure(m, traj.n_atoms) for m in args.measure]
    if len(frames) > MAX_MOVIE_FRAMES:
        raise BasinmarkError(f"a movie has at most {MAX_MOVIE_FRAMES} frames; run {args.run} has {len(frames)} "
                             f"in the frames asked for: choose a part with --frames A:B (e.g. --frames 1:"
                             f"{MAX_MOVIE_FRAMES})")
    rules_file = Path(args.rules) if args.rules else rules_path(root)
    rules = result = None
    if rules_file.is_file():
        rules = load_rules(rules_file, n_atoms=traj.n_atoms)
        result = classify_run(traj, rules)
    elif args.rules:
        raise BasinmarkError(f"{rules_file}: no such rules file")
    else:
        print(f"note: no rules file at {rules_file}; the movie shows no thresholds or basins", file=sys.stderr)
    ensure_gui_platform()
    from basinmark.gui.app import make_app

    make_app([sys.argv[0] if sys.argv else "basinmark"])
    done = {"last": -1}

    def progress(n: int, total: int) -> None:
        pct = 100 * n // total
        if pct // 10 != done["last"] and sys.stderr.isatty():
            done["last"] = pct // 10
            print(f"\rrendering {n}/{total} frames", end="", file=sys.stderr, flush=True)

    res = export_movie(args.output, traj, result=result, rules=rules, fps=args.fps, size=size, frames=frames,
                       energy_unit=args.energy_unit, progress=progress, user_monitors=measures)
    if sys.stderr.isatty():
        print(file=sys.stderr)
    print(f"wrote {res.path}: {res.n_frames} frames, {res.size[0]}x{res.size[1]} pixels, {res.fps:g} frames/s")
    if res.note:
        print(f"note: {res.note}")
    if result is not None and "energy_drift" in result.flags:
        print(f"caution: run {traj.run_id} failed the energy check (its total energy drifts beyond the limit)")
    return 0


__all__ = ["register", "cmd_movie", "cmd_review", "load_one_run", "ensure_gui_platform"]
