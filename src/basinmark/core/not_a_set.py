"""A folder that is not a set: no run files were found in it.

Opening such a folder (in the window or with a command) writes nothing into it — no label journal, head or
lock file and no cache folder — and says plainly that it is not a set, with the file names a set is
recognised by.
"""

from __future__ import annotations

from pathlib import Path
from typing import Sequence

from basinmark.core.errors import SetError

#: how runs are recognised, in one sentence (docs/set-manifest.md has the details)
EXPECTED_NAMES = ("runs are recognised by names like run-0001.bwd.xyz and run-0001.fwd.xyz (also .gz, .bz2, "
                  ".xz), run_1_backward.xyz and run_1_forward.xyz, run1/bwd.xyz and run1/fwd.xyz, or joined "
                  "run-0001.xyz; a basinmark-set.toml can name other patterns (docs/set-manifest.md)")


class NotASetError(SetError):
    """The folder holds no runs: nothing was (or will be) written into it."""


def not_a_set_message(root: str | Path, left_out: Sequence = ()) -> str:
    """``<root> is not a set: …`` — why, what a set looks like, and that nothing was written."""
    root = Path(root)
    why = "no run files were found in it"
    if left_out:
        n = len(left_out)
        names = ", ".join(Path(getattr(f, "path", f)).name for f in list(left_out)[:3]) + (" …" if n > 3 else "")
        why = f"none of its files is a run ({n} left out: {names})"
    return f"{root} is not a set: {why}; {EXPECTED_NAMES}. Nothing was written into the folder."


def holds_no_runs(tset) -> bool:
    """True for a loaded set without any run and without any run file that failed to load."""
    return len(tset) == 0 and not tset.failures


def require_set(root: str | Path):
    """The set's plan (:func:`basinmark.core.sets.discover`), or NotASetError when no run file is found."""
    from basinmark.core.sets import discover

    plan = discover(root)
    if not plan.runs and not plan.failures:
        raise NotASetError(not_a_set_message(plan.root, plan.left_out))
    return plan
