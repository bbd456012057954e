"""Render the window at 1366×768 with the map of all runs, then the summary, in front, offscreen.

The set is copied to a temporary folder first, so no journal or cache is written into the source
tree.  Usage::

    QT_QPA_PLATFORM=offscreen python scripts/screenshots_analysis.py [--set FOLDER] [--out DIR] [--size 1366x768]
"""

from __future__ import annotations

import sys
import tempfile
from pathlib import Path

from _shots import close, copy_set, open_window, parse_args, save, show_view  # scripts/ is on sys.path when run


def render(set_path: Path, out_dir: Path, size: tuple[int, int]) -> list[Path]:
    written = []
    with tempfile.TemporaryDirectory(prefix="basinmark-shot-") as tmp:
        app, win = open_window(copy_set(set_path, Path(tmp)), Path(tmp), size)
        st = win.state
        # a beta run, part-way through its forward half, so the highlight and marker show on the map
        beta = next((r for r, f in zip(st.labels["run"], st.labels["final_label"]) if f == "beta"), st.run_id)
        st.set_run(beta)
        traj = st.traj
        st.set_frame(min(traj.n_frames - 1, traj.ts_index + (traj.n_frames - traj.ts_index) // 3))
        # the TST comparison shown is the set's own ([tst] in basinmark-set.toml), taken when the set opened
        for key, name in (("map", "map.png"), ("summary", "summary.png")):
            show_view(app, win, key)
            written.append(save(win, out_dir / name))
        close(app, win)
    return written


def main(argv: list[str] | None = None) -> int:
    args = parse_args(__doc__, argv)
    if not args.set.is_dir():
        print(f"screenshots: {args.set}: no such set folder", file=sys.stderr)
        return 2
    render(args.set, args.out, args.size_px)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
