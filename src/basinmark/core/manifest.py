"""The optional set manifest ``basinmark-set.toml``: how the files of a set are laid out.

Every key, with worked examples, is documented in ``docs/set-manifest.md``.  Without a manifest, a set
uses :data:`DEFAULT` and runs are found by their names (:mod:`basinmark.core.pairing`).  Every error
names the file, the line and the key (:func:`_validate`).  A manifest may override any key::

    name = "my study"
    [files]
    backward = "{run}.bwd.*"        # {run} is the run id, * any text; matched against file names
    forward  = "{run}.fwd.*"
    joined   = ["{run}.xyz", "{run}.xyz.gz", "{run}.extxyz", "{run}.traj"]
    folders  = [".", "runs"]        # where to look, relative to the set folder
    [units]
    time = "fs"                     # fs | ps | as | au
    energy = "eV"                   # eV | kcal/mol | kJ/mol | hartree
    length = "angstrom"             # angstrom | bohr | nm | pm
    [keys]                          # comment-line keys holding these per-frame values
    time = "time"
    potential = "epot"
    kinetic = "ekin"
    total = "etot"
    [time]
    step_fs = 1.0                   # used only when the files carry no time key
    backward = "auto"               # auto | elapsed | signed: how backward halves write time
    [comment]                       # comment lines that are prose: a template (or regex = '...(?P<time>...)')
    template = "i = {step}, time = {time}, E = {potential}"
    units = { time = "ps", potential = "hartree" }   # per field, when it differs from [units]
    [tst]                           # the study's own TST estimate, shown beside the observed ratio
    major = "alpha"                 # the pair it names (products of the rules) ...
    minor = "beta"
    ddg = 0.3                       # ... and ΔΔG‡ = G‡(minor) − G‡(major), from separate transition states
    unit = "kcal/mol"
    temperature = 298.15
    source = "where the number comes from"
    # instead of major/minor/ddg, one free-energy barrier per product (TST then predicts every share):
    # [tst.barriers]
    # alpha = 14.2
    # beta = 14.5
    # gamma = 15.9
    # optionally a measured ratio with its uncertainty, shown beside the runs and TST:
    # [tst.experiment]
    # numerator = "alpha"
    # denominator = "beta"
    # ratio = 2.4
    # uncertainty = 0.3
    # source = "where the measurement comes from"

The manifest is data only; nothing in it is ever evaluated.
"""

from __future__ import annotations

import copy
import fnmatch
import hashlib
import json
import math
import re
from dataclasses import dataclass
from pathlib import Path

from basinmark.core.errors import SetError
from basinmark.core.io.free_form import ROLES, CommentFormat, template_regex
from basinmark.core.toml_text import TomlTextError, line_of
from basinmark.core.toml_text import read as read_toml
from basinmark.core.units import ENERGY_UNITS, LENGTH_UNITS, TIME_UNITS, energy_factor, length_factor, time_factor

MANIFEST_NAME = "basinmark-set.toml"

DEFAULT: dict = {
    "name": "",
    "files": {
        "backward": ["{run}.bwd.*"],
        "forward": ["{run}.fwd.*"],
        "joined": ["{run}.xyz", "{run}.xyz.gz", "{run}.xyz.bz2", "{run}.xyz.xz", "{run}.extxyz",
                   "{run}.extxyz.gz", "{run}.traj"],
        "folders": [".", "runs"],
    },
    "units": {"time": "fs", "energy": "eV", "length": "angstrom"},
    # compared without case; the first key a file carries is used.  ``energy`` is the key ase writes for a
    # calculator's potential energy; ``kinetic``/``potential``/``total`` are common spellings of the rest
    "keys": {
        "time": ["time", "t", "time_fs"],
        "potential": ["epot", "energy", "potential_energy", "potential", "e_pot", "pot_energy"],
        "kinetic": ["ekin", "kinetic_energy", "kinetic", "e_kin", "kin_energy"],
        "total": ["etot", "total_energy", "total", "e_tot", "etotal", "tot_energy"],
    },
    "time": {"step_fs": None, "backward": "auto"},
    "tst": None,  # read on its own by _tst (its tables hold product names chosen by the study)
    "comment": None,  # read on its own by _comment_format (free-form comment lines)
}

_TOP_KEYS = {"name", "files", "units", "keys", "time", "tst", "comment"}
_UNIT_NAMES = {"time": list(TIME_UNITS), "energy": list(ENERGY_UNITS), "length": list(LENGTH_UNITS)}


def _as_list(value) -> list[str]:
    return [value] if isinstance(value, str) else list(value)


def _pattern_regex(pattern: str) -> re.Pattern:
    """``{run}.bwd.*`` → a regex with one named group ``run`` (our own tiny pattern language)."""
    if pattern.count("{run}") != 1:
        raise ValueError(f"pattern {pattern!r} must contain {{run}} exactly once")
    head, tail = pattern.split("{run}")
    to_re = lambda s: fnmatch.translate(s)[4:-3] if s else ""  # noqa: E731  strip (?s: ... )\Z
    return re.compile(f"^{to_re(head)}(?P<run>.+?){to_re(tail)}$")


@dataclass(frozen=True)
class SetLayout:
    """A validated manifest (or the defaults)."""

    name: str
    backward: tuple[re.Pattern, ...]
    forward: tuple[re.Pattern, ...]
    joined: tuple[re.Pattern, ...]
    folders: tuple[str, ...]
    time_factor: float  # fs per file time unit
    energy_factor: float  # eV per file energy unit
    length_factor: float  # Å per file length unit
    keys: dict  # role -> tuple of candidate comment keys
    step_fs: float | None
    backward_time: str
    fingerprint: str  # hash of everything that changes how files are turned into runs
    source: Path | None = None
    tst: dict | None = None  # [tst] as read: kind, stated values and "estimate" (see _tst)
    patterns_given: bool = False  # the manifest names file patterns; else runs are found by naming conventions
    comment_format: CommentFormat | None = None  # [comment]: numbers taken out of free-form comment lines

    @property
    def nested(self) -> bool:
        """Some pattern names a sub-folder (``{run}/fwd.xyz``): look one folder down as well."""
        return any("/" in p.pattern for p in self.backward + self.forward + self.joined)

    def role_of(self, filename: str) -> tuple[str, str] | None:
        """``(role, run_id)`` for a file name, or None when no pattern matches."""
        for role, patterns in (("backward", self.backward), ("forward", self.forward), ("joined", self.joined)):
            for p in patterns:
                m = p.match(filename)
                if m:
                    return role, m.group("run")
        return None


def _merge(base: dict, over: dict, where: str) -> dict:
    out = copy.deepcopy(base)
    for key, value in over.items():
        if key not in base:
            raise SetError(f"{where}: unknown key {key!r} (known: {', '.join(sorted(base))})")
        if isinstance(base[key], dict):
            if not isinstance(value, dict):
                raise SetError(f"{where}: [{key}] must be a table")
            out[key] = _merge(base[key], value, f"{where} [{key}]")
        else:
            out[key] = value
    return out


def _tst(raw: object, path: Path, text: str) -> dict | None:
    """The [tst] table: a named pair, or per-product barriers (see :mod:`basinmark.core.tst`).

    Returns None without a ΔΔG‡ or barriers; else a dict with the stated values and, under
    ``"estimate"``, the checked :class:`~basinmark.core.tst.TSTEstimate` (None when an old manifest
    gives a ΔΔG‡ without naming its products: the summary then says how to name them).
    """
    from basinmark.core.tst import Experiment, TSTError, TSTEstimate

    if raw is None:
        return None
    if not isinstance(raw, dict):
        raise SetError(f"{path}: [tst] must be a table")
    known = ("major", "minor", "ddg", "unit", "temperature", "source", "barriers", "experiment")
    for key in raw:
        if key not in known:
            raise SetError(f"{_where(path, text, 'tst', key)}: unknown key {key!r} in [tst] (known: {', '.join(known)})")
    unit, temperature, source = raw.get("unit", "kcal/mol"), raw.get("temperature", 298.15), str(raw.get("source", ""))
    try:
        experiment = None
        if "experiment" in raw:
            experiment = _experiment(raw["experiment"], path, text)
        if "barriers" in raw:
            clash = [k for k in ("major", "minor", "ddg") if k in raw]
            if clash:
                raise SetError(f"{_where(path, text, 'tst', clash[0])}: [tst] gives both barriers and "
                               f"{', '.join(clash)}; keep one form (a named pair or one barrier per product)")
            if not isinstance(raw["barriers"], dict):
                raise SetError(f"{_where(path, text, 'tst', 'barriers')}: [tst.barriers] must be a table of "
                               f"product = barrier")
            est = TSTEstimate.from_barriers(raw["barriers"], unit, temperature, source=source, origin=path.name,
                                            where=f"{_where(path, text, 'tst.barriers')}: [tst.barriers]",
                                            experiment=experiment)
            return {"kind": "barriers", "ddg": None, "barriers": dict(est.barriers), "unit": est.unit,
                    "temperature": est.temperature, "source": source, "estimate": est, "where": str(path)}
        if "ddg" not in raw:
            if "major" in raw or "minor" in raw:
                raise SetError(f"{_where(path, text, 'tst')}: [tst] names major/minor but gives no ddg "
                               f"(ΔΔG‡ = G‡(minor) − G‡(major))")
            if experiment is not None:
                return {"kind": "experiment", "ddg": None, "unit": str(unit), "temperature": 298.15,
                        "source": source, "estimate": None, "experiment": experiment, "where": str(path)}
            return None
        where = f"{_where(path, text, 'tst', 'ddg')}: [tst]"
        if "major" in raw or "minor" in raw:
            if not ("major" in raw and "minor" in raw):
                raise SetError(f"{where} names only one product; give both major and minor "
                               f"(ΔΔG‡ = G‡(minor) − G‡(major))")
            est = TSTEstimate.pair(raw["major"], raw["minor"], raw["ddg"], unit, temperature, source=source,
                                   origin=path.name, where=where, experiment=experiment)
            return {"kind": "pair", "major": est.major, "minor": est.minor, "ddg": est.ddg, "unit": est.unit,
                    "temperature": est.temperature, "source": source, "estimate": est, "where": str(path)}
        # an old manifest: a ΔΔG‡ without its products; checked now, named later (see summary)
        probe = TSTEstimate.pair("major", "minor", raw["ddg"], unit, temperature, where=where)
        return {"kind": "unnamed", "ddg": probe.ddg, "unit": probe.unit, "temperature": probe.temperature,
                "source": source, "estimate": None, "experiment": experiment, "where": str(path)}
    except TSTError as exc:
        raise SetError(str(exc)) from None


def _experiment(raw: object, path: Path, text: str) -> object:
    from basinmark.core.tst import Experiment, TSTError

    where = f"{_where(path, text, 'tst.experiment')}: [tst.experiment]"
    if not isinstance(raw, dict):
        raise SetError(f"{where} must be a table")
    need = ("numerator", "denominator", "ratio")
    missing = [k for k in need if k not in raw]
    unknown = [k for k in raw if k not in need + ("uncertainty", "source")]
    if missing or unknown:
        raise SetError(f"{where} needs numerator, denominator and ratio (optionally uncertainty and source)"
                       + (f"; missing {', '.join(missing)}" if missing else "")
                       + (f"; unknown {', '.join(unknown)}" if unknown else ""))
    try:
        ratio, unc = float(raw["ratio"]), float(raw.get("uncertainty", 0.0))
    except (TypeError, ValueError):
        raise SetError(f"{where} ratio and uncertainty must be numbers") from None
    if not (math.isfinite(ratio) and ratio > 0 and math.isfinite(unc) and unc >= 0):
        raise SetError(f"{where} ratio must be a positive finite number and uncertainty a finite number ≥ 0, "
                       f"got {ratio:g} ± {unc:g}")
    a, b = raw["numerator"], raw["denominator"]
    if not (isinstance(a, str) and isinstance(b, str) and a.strip() and b.strip() and a.strip() != b.strip()):
        raise SetError(f"{where} numerator and denominator must name two different products")
    try:
        return Experiment(a.strip(), b.strip(), ratio, unc, str(raw.get("source", "")))
    except TSTError as exc:  # pragma: no cover - Experiment does not check further
        raise SetError(str(exc)) from None


def _where(path: Path, text: str, table: str, key: str | None = None) -> str:
    """``path, line N`` for ``key`` in ``[table]`` (or the table's header), else just the path.

    tomllib gives no positions, so the line is found by a plain scan of the text (enough for the
    one-key-per-line tables a manifest holds).
    """
    current, header_line = "", None
    for number, line in enumerate(text.splitlines(), start=1):
        stripped = line.strip()
        m = re.match(r"^\[\s*([^\[\]]+?)\s*\]", stripped)
        if m:
            current = m.group(1).replace(" ", "")
            if current == table and header_line is None:
                header_line = number
            continue
        if key is not None and current == table and re.match(rf"^\s*{re.escape(key)}\s*=", line):
            return f"{path}, line {number}"
    return f"{path}, line {header_line}" if header_line is not None else str(path)


_TEXTS = "a text or a list of texts"


def _texts(value) -> bool:
    return isinstance(value, str) or (isinstance(value, list) and bool(value)
                                       and all(isinstance(v, str) for v in value))


def _validate(raw: dict, path: Path, text: str) -> None:
    """Check every key the manifest gives before it is used; each error names the file, the key and the line."""
    def fail(table: str, key: str | None, problem: str) -> SetError:
        line = line_of(text, table, key) if key is not None else line_of(text, table)
        if line is None and key is not None and table == "":
            line = line_of(text, key)  # a table given as [key]
        where = f"{path}, line {line}" if line is not None else str(path)
        name = f"[{table}] {key}" if table and key else (key or f"[{table}]")
        return SetError(f"{where}: {name}: {problem}")

    for key, value in raw.items():
        if key not in DEFAULT:
            known = ", ".join(sorted(DEFAULT))
            raise fail("", key, f"unknown key {key!r} (known: {known}; see docs/set-manifest.md)")
        if key in ("tst", "comment"):
            continue  # checked by _tst and _comment_format
        if isinstance(DEFAULT[key], dict):
            if not isinstance(value, dict):
                raise fail("", key, f"must be a table ([{key}] on a line of its own, then its keys)")
            for sub in value:
                if sub not in DEFAULT[key]:
                    known = ", ".join(DEFAULT[key])
                    raise fail(key, sub, f"unknown key {sub!r} in [{key}] (known: {known})")
    if "name" in raw and not isinstance(raw["name"], str):
        raise fail("", "name", "must be a text in quotes")
    for key, value in raw.get("files", {}).items():
        if key not in ("backward", "forward", "joined", "folders"):
            continue
        if not _texts(value):
            raise fail("files", key, f"must be {_TEXTS}, e.g. {key} = \"{DEFAULT['files'][key][0]}\"")
        if key != "folders":
            for pattern in _as_list(value):
                if pattern.count("{run}") != 1:
                    raise fail("files", key, f"the pattern {pattern!r} must contain {{run}} exactly once "
                                             "(where the run's name stands in the file name)")
    checks = {"time": time_factor, "energy": energy_factor, "length": length_factor}
    for key, value in raw.get("units", {}).items():
        if key not in checks:
            continue
        if not isinstance(value, str):
            problem = f"must be a unit in quotes; use one of: {', '.join(_UNIT_NAMES[key])}"
            raise fail("units", key, problem)
        try:
            checks[key](value)
        except ValueError as exc:
            raise fail("units", key, str(exc)) from None
    for key, value in raw.get("keys", {}).items():
        if key in DEFAULT["keys"] and not _texts(value):
            raise fail("keys", key, f"must be {_TEXTS} (the comment-line keys to look for, first found is used)")
    timing = raw.get("time", {})
    if "step_fs" in timing:
        v = timing["step_fs"]
        if isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(v) or v <= 0:
            raise fail("time", "step_fs", f"must be a positive number of fs (the time between frames), not {v!r}")
    if "backward" in timing and timing["backward"] not in ("auto", "elapsed", "signed"):
        raise fail("time", "backward", f"must be auto, elapsed or signed, not {timing['backward']!r}")


def load_layout(root: str | Path) -> SetLayout:
    """Read ``basinmark-set.toml`` from ``root`` if present, else the defaults (see docs/set-manifest.md)."""
    root = Path(root)
    path = root / MANIFEST_NAME
    raw: dict = {}
    text = ""
    if path.exists():
        try:
            raw, text = read_toml(path)
        except TomlTextError as exc:
            raise SetError(str(exc)) from None
    _validate(raw, path, text)
    cfg = _merge(DEFAULT, {k: v for k, v in raw.items() if k not in ("tst", "comment")}, str(path))
    comment_format = _comment_format(raw.get("comment"), path, text, cfg["units"])
    if comment_format is not None:
        cfg["comment"] = raw["comment"]  # part of the fingerprint: another template reads other values
        for field in comment_format.fields:  # the template's own fields come first
            if field in cfg["keys"]:
                cfg["keys"][field] = [field] + [k for k in _as_list(cfg["keys"][field]) if k != field]
    try:
        files = cfg["files"]
        layout = SetLayout(
            name=str(cfg["name"] or root.name),
            backward=tuple(_pattern_regex(p) for p in _as_list(files["backward"])),
            forward=tuple(_pattern_regex(p) for p in _as_list(files["forward"])),
            joined=tuple(_pattern_regex(p) for p in _as_list(files["joined"])),
            folders=tuple(_as_list(files["folders"])),
            time_factor=time_factor(cfg["units"]["time"]),
            energy_factor=energy_factor(cfg["units"]["energy"]),
            length_factor=length_factor(cfg["units"]["length"]),
            keys={role: tuple(_as_list(v)) for role, v in cfg["keys"].items()},
            step_fs=None if cfg["time"]["step_fs"] is None else float(cfg["time"]["step_fs"]),
            backward_time=str(cfg["time"]["backward"]),
            fingerprint=hashlib.sha256(json.dumps({k: v for k, v in cfg.items() if k != "tst"},
                                                  sort_keys=True).encode()).hexdigest(),
            source=path if path.exists() else None,
            tst=_tst(raw.get("tst"), path, text),
            patterns_given=any(k in raw.get("files", {}) for k in ("backward", "forward", "joined")),
            comment_format=comment_format,
        )
    except (ValueError, TypeError) as exc:
        raise SetError(f"{path}: {exc}") from None
    if layout.backward_time not in ("auto", "elapsed", "signed"):
        raise SetError(f"{path}: [time] backward must be auto, elapsed or signed, not {layout.backward_time!r}")
    if layout.step_fs is not None and not layout.step_fs > 0:
        raise SetError(f"{path}: [time] step_fs must be a positive number of fs")
    return layout


# --- free-form comment lines: [comment] -------------------------------------------------------
# Keys: ``template`` or ``regex`` (one of them), and ``units``, a table giving a unit per field when it
# differs from [units] (time: a time unit; potential/kinetic/total: an energy unit).

_COMMENT_KEYS = ("template", "regex", "units")


def _comment_format(raw: object, path: Path, text: str, units: dict) -> CommentFormat | None:
    """``[comment]`` as a CommentFormat whose factors bring each field into the set's [units]."""
    if raw is None:
        return None

    def fail(key: str | None, problem: str) -> SetError:
        line = line_of(text, "comment", key) if key else line_of(text, "comment")
        if line is None and key == "units":
            line = line_of(text, "comment.units")
        where = f"{path}, line {line}" if line is not None else str(path)
        return SetError(f"{where}: [comment]{' ' + key if key else ''}: {problem}")

    if not isinstance(raw, dict):
        raise fail(None, "must be a table ([comment] on a line of its own, then template = \"...\" or "
                         "regex = '...')")
    for key in raw:
        if key not in _COMMENT_KEYS:
            raise fail(key, f"unknown key {key!r} in [comment] (known: {', '.join(_COMMENT_KEYS)})")
    if ("template" in raw) == ("regex" in raw):
        raise fail(None, "give either template = \"...\" or regex = '...' (one of the two)")
    key = "template" if "template" in raw else "regex"
    given = raw[key]
    if not isinstance(given, str) or not given.strip():
        raise fail(key, "must be a text in quotes")
    try:
        pattern = template_regex(given) if key == "template" else given
        re.compile(pattern)
    except (ValueError, re.error) as exc:
        raise fail(key, f"{exc}") from None
    field_units = raw.get("units", {})
    if not isinstance(field_units, dict):
        raise fail("units", "must be a table of field = \"unit\", e.g. units = { time = \"ps\" }")
    factors = []
    for field, unit in field_units.items():
        if field not in ROLES:
            raise fail("units", f"a unit can be given for {', '.join(ROLES)}, not {field!r}")
        kind = "time" if field == "time" else "energy"
        convert = time_factor if kind == "time" else energy_factor
        if not isinstance(unit, str):
            raise fail("units", f"{field}: must be a unit in quotes; use one of: {', '.join(_UNIT_NAMES[kind])}")
        try:
            factors.append((field, convert(unit) / convert(units[kind])))
        except ValueError as exc:
            raise fail("units", f"{field}: {exc}") from None
    try:
        made = CommentFormat(pattern, tuple(factors), f"the [comment] {key} of {path.name}")
    except ValueError as exc:
        raise fail(key, str(exc)) from None
    missing = [f for f, _ in factors if f not in made.fields]
    if missing:
        raise fail("units", f"{', '.join(missing)} is not a field of the {key}")
    return made
