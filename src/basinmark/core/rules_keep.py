"""Write changed rules back into the chemist's own rules text, keeping comments, order and layout.

:func:`keep_text` loads the original text with :mod:`tomlkit` (a TOML library that round-trips comments and
whitespace), changes only the values that differ from the rules, adds what is new, drops what was removed,
and then reads the result back: if it does not give exactly the rules (say the basins were reordered, which
changes the track indices), the canonical text of :meth:`Rules.to_toml` is used instead and the caller is told
why, so a save never writes rules other than the ones in force.
"""

from __future__ import annotations

from typing import Any

import tomlkit
from tomlkit.exceptions import TOMLKitError

from basinmark.core import toml_text

#: keys the reader fills in when absent, with the value it fills in; absent keys whose value is still the
#: default stay absent (a save does not add lines the chemist never wrote)
_DEFAULTS = {
    (): {"name": "", "reactant": "reactant", "allow_overlap": False},
    ("flags",): {"energy_unit": "kcal/mol"},
    ("time_gap",): {},
}


def _plain(v: Any) -> Any:
    """tomlkit item -> plain Python value."""
    return v.unwrap() if hasattr(v, "unwrap") else v


def _same(old: Any, new: Any, key: str) -> bool:
    old = _plain(old)
    if key == "energy_unit" and isinstance(old, str) and isinstance(new, str):
        return old.strip().lower() == new.lower()  # the reader accepts any case
    if key == "nearest" and isinstance(old, list) and len(old) == 1 and isinstance(new, dict):
        return old[0] == new  # a one-item list and a lone table mean the same
    return old == new  # 2 == 2.0 in Python, so `dwell_fs = 20` is kept when the value is 20.0


def _sync(box, target: dict, path: tuple, defaults_of: dict) -> None:
    """Make the tomlkit container ``box`` hold ``target``, touching only what differs."""
    for key in [k for k in box if k not in target]:
        del box[key]
    absent_ok = defaults_of.get(path, {})
    for key, new in target.items():
        if key not in box:
            if key in absent_ok and absent_ok[key] == new:
                continue
            box[key] = new
            continue
        old = box[key]
        if _same(old, new, key):
            continue
        if isinstance(new, dict) and isinstance(_plain(old), dict):
            _sync(old, new, path + (key,), defaults_of)
        elif (isinstance(new, list) and isinstance(_plain(old), list) and len(_plain(old)) == len(new)
              and all(not isinstance(x, (dict, list)) for x in new)):
            for i, x in enumerate(new):  # element by element: the array keeps its spacing
                if _plain(old[i]) != x:
                    old[i] = x
        else:
            box[key] = new


def keep_text(original: str, rules) -> tuple[str, str]:
    """``(text, why_not_kept)``: ``rules`` written into ``original``; ``why_not_kept`` is "" when the original's
    comments, order and layout were kept, else a sentence saying why the canonical text was written instead."""
    from basinmark.core.rules import DEFAULT_CONCERTED_FS, DEFAULT_DWELL_FS, DEFAULT_MAX_DRIFT, parse_rules

    canonical = rules.to_toml()
    try:
        doc = tomlkit.parse(original.lstrip("\ufeff"))
        toml_text.loads(original)  # tomlkit alone accepts a few texts the standard reader rejects
    except (TOMLKitError, toml_text.TomlTextError, ValueError) as exc:
        return canonical, f"the original text could not be read ({exc}); the rules were written afresh"
    defaults = {k: dict(v) for k, v in _DEFAULTS.items()}
    defaults[()]["dwell_fs"] = DEFAULT_DWELL_FS
    defaults[("flags",)]["max_energy_drift"] = DEFAULT_MAX_DRIFT
    defaults[("time_gap",)]["concerted_fs"] = DEFAULT_CONCERTED_FS
    target = toml_text.loads(canonical)
    _sync(doc, target, (), defaults)
    text = tomlkit.dumps(doc)
    try:
        again = parse_rules(text, rules.source)
    except Exception as exc:  # noqa: BLE001 - any failure means: do not trust the merged text
        return canonical, f"the edited text did not read back ({exc}); the rules were written afresh"
    if again != rules:
        return canonical, ("the rules changed in a way the original layout cannot hold (such as a new basin "
                           "order); the rules were written afresh without the original comments")
    return text, ""


#: decimals a dragged threshold keeps: what the window shows (0.01 Å for distances, 0.1° for angles and
#: dihedrals); finer digits from a mouse drag are noise, not a choice (common practice, no source)
SHOWN_DECIMALS = {"distance": 2, "angle": 1, "dihedral": 1}


def round_as_shown(value: float, kind: str) -> float:
    """``value`` rounded to the precision shown for a monitor of ``kind``."""
    return round(float(value), SHOWN_DECIMALS.get(kind, 2))
