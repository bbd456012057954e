"""Render one frame of a movie (molecule beside the traces, with a distance the chemist added) to PNG, as
``basinmark movie`` and Export ▸ Export Movie… draw it, offscreen.

Usage::

    QT_QPA_PLATFORM=offscreen python scripts/screenshots_movie.py [--set FOLDER] [--out DIR] [--size 640x480]
"""

from __future__ import annotations

import sys

from _shots import parse_args  # scripts/ is on sys.path when run


def main(argv: list[str] | None = None) -> int:
    args = parse_args(__doc__, argv, size="640x480")
    if not (args.set / "basins.toml").is_file():
        print(f"screenshots_movie: {args.set}: not a set folder with basins.toml", file=sys.stderr)
        return 2
    from basinmark.commands.media import load_one_run
    from basinmark.core.classify import classify_run
    from basinmark.core.rules import load_rules
    from basinmark.core.sets import discover
    from basinmark.gui.app import make_app
    from basinmark.gui.movie import MovieRenderer

    make_app()
    plan = discover(args.set)
    run = plan.runs[0].run_id
    traj = load_one_run(args.set, run, use_cache=False)  # reads the one run; writes no cache into the source tree
    rules = load_rules(args.set / "basins.toml", n_atoms=traj.n_atoms)
    renderer = MovieRenderer(traj, result=classify_run(traj, rules), rules=rules, size=args.size_px,
                             user_monitors=[(1, 5)])
    try:
        frame = min(traj.n_frames - 1, traj.ts_index + (traj.n_frames - traj.ts_index) // 3)
        args.out.mkdir(parents=True, exist_ok=True)
        path = args.out / "movie-frame.png"
        renderer.render(frame).save(str(path))
        print(path)
    finally:
        renderer.close()
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
