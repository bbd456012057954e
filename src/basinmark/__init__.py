"""basinmark: classify, inspect, hand-label and count reaction-dynamics runs.

The headless core lives in :mod:`basinmark.core` (no Qt); the desktop window in
:mod:`basinmark.gui`; the command line in :mod:`basinmark.cli`.  For notebooks the
everyday entry points are importable from the top level (loaded on first use)::

    import basinmark as bm
    tset = bm.open_set("sample_sets/ringfork")
    table = bm.classify_set(tset, bm.load_rules(bm.rules_path(tset.root)))
"""

from __future__ import annotations

import importlib

__version__ = "0.1.0"

#: top-level name -> module that defines it (imported lazily, so ``import basinmark`` stays light)
_API = {
    "open_set": "basinmark.core.sets",
    "rules_path": "basinmark.core.sets",
    "journal_path": "basinmark.core.sets",
    "load_rules": "basinmark.core.rules",
    "parse_rules": "basinmark.core.rules",
    "classify_set": "basinmark.core.classify",
    "classify_run": "basinmark.core.classify",
    "LabelJournal": "basinmark.core.journal",
    "verify_journal": "basinmark.core.journal",
    "build_summary": "basinmark.core.summary",
    "compare_labels": "basinmark.core.review",
    "read_frames": "basinmark.core.io",
    "Trajectory": "basinmark.core.model",
    "TrajectorySet": "basinmark.core.model",
}

__all__ = ["__version__", *_API]


def __getattr__(name: str):
    module = _API.get(name)
    if module is None:
        raise AttributeError(f"module 'basinmark' has no attribute {name!r}")
    value = getattr(importlib.import_module(module), name)
    globals()[name] = value
    return value


def __dir__() -> list[str]:
    return sorted(__all__)
