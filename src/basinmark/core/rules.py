"""The rules file (TOML): monitors, basins, dwell, flag limits and the time-gap setting.

The file is read with :mod:`tomllib` only (through :mod:`basinmark.core.toml_text`); nothing in it is ever evaluated as code.
Atom numbers in the file are **1-based**; :attr:`Monitor.indices` gives the 0-based
indices the geometry code uses.  See docs/rules-file.md for the reference.

Condition semantics (per monitor value v): ``below = x`` is v < x, ``above = x`` is
v > x, ``between = [lo, hi]`` is lo <= v <= hi.  A nearest-atom condition
``nearest = { atom = A, among = [...], is = B, within = d }`` holds when B is the member of the group closest
to A (and, with ``within``, closer than d Å).  All conditions of a basin must hold.
"""

from __future__ import annotations

import difflib
import hashlib
import math
import re
import unicodedata
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Any, Mapping

import numpy as np

from basinmark.core import toml_text
from basinmark.core.errors import BasinmarkError
from basinmark.core.units import ENERGY_UNITS

#: outcome names the classifier and the journal reserve; must match core.labels.FIXED_LABELS
RESERVED_LABELS = ("recrossing", "unfinished", "ambiguous", "excluded")
MONITOR_KINDS = {2: "distance", 3: "angle", 4: "dihedral"}
MONITOR_UNITS = {"distance": "Å", "angle": "deg", "dihedral": "deg"}
#: values a monitor can take: (lo, lo_closed, hi, hi_closed)
_DOMAINS = {
    "distance": (0.0, True, math.inf, False),
    "angle": (0.0, True, 180.0, True),
    "dihedral": (-180.0, False, 180.0, True),
}
BOUNDS = ("below", "above")
DEFAULT_MAX_DRIFT = 1.0  # kcal/mol over a run; common practice, no source
DEFAULT_CONCERTED_FS = 60.0  # common practice in the dynamics literature, from memory
#: How long a run must stay in a basin to commit when the file does not say.  20 fs outlasts nearly two
#: periods of a C-H stretch (~3000 cm^-1, from memory: 1/(c * 3000 cm^-1) = 11.1 fs), the fastest vibration
#: of an organic molecule, so a bond jittering about a threshold does not commit, while staying short against
#: runs of a few hundred fs.  The choice of two periods is common practice, no source.
DEFAULT_DWELL_FS = 20.0
MAX_BASIN_NAME = 64  # the longest label the journal accepts (core.labels)

_TOP_KEYS = ("name", "reactant", "dwell_fs", "allow_overlap", "monitors", "basins", "flags", "time_gap")
_FLAG_KEYS = ("late_commit_fs", "max_energy_drift", "energy_unit", "min_length_fs")
_GAP_KEYS = ("bonds", "form_below", "concerted_fs")
_CONDITION_KINDS = ("below", "above", "between")


def did_you_mean(word: str, choices) -> str:
    """" (did you mean X?)" for the nearest of ``choices`` (difflib's ratio), else ""."""
    near = difflib.get_close_matches(str(word), [str(c) for c in choices], n=1, cutoff=0.6)
    return f" (did you mean {near[0]}?)" if near else ""


def basin_name_problem(name: object, others=()) -> str | None:
    """Why ``name`` cannot be a basin name (every basin name is a possible label), or None.

    Checked as a label is (core.labels.check_label_text): text, not empty, no surrounding spaces, no control
    characters or line breaks, at most 64 characters; and no clash, ignoring case, with the fixed labels or
    with another basin (``others``), which people would read as the same outcome.
    """
    if not isinstance(name, str):
        return f"a basin name must be text, got {name!r}"
    if not name.strip():
        return "a basin name cannot be empty: it is the label of an outcome"
    if name != name.strip():
        return f"the basin name {name!r} starts or ends with a space, which a label cannot"
    if len(name) > MAX_BASIN_NAME:
        return f"the basin name {name[:20]!r}... is longer than {MAX_BASIN_NAME} characters, too long for a label"
    if any(unicodedata.category(c) in ("Cc", "Zl", "Zp") for c in name):
        return f"the basin name {name!r} contains control characters or line breaks, which a label cannot"
    for fixed in RESERVED_LABELS:
        if name.casefold() == fixed.casefold():
            return (f"the basin name {name!r} is the fixed outcome label {fixed!r} (ignoring case); choose another "
                    "basin name")
    for other in others:
        if other != name and other.casefold() == name.casefold():
            return f"the basin names {other!r} and {name!r} differ only in case; outcome labels must be told apart"
    return None


class RulesError(BasinmarkError):
    """A rules file is unusable: names the file, the TOML key path (and the line when known)."""

    def __init__(self, source: str | Path, problem: str, key: str | None = None, line: int | None = None):
        self.source = str(source)
        self.key = key
        self.line = line
        self.problem = problem
        where = self.source
        if line is not None:
            where += f", line {line}"
        if key:
            where += f", key {key}"
        super().__init__(f"{where}: {problem}")


# --- the model --------------------------------------------------------------------------------

@dataclass(frozen=True)
class Monitor:
    """A distance (2 atoms, Å), angle (3, deg) or dihedral (4, deg) by **1-based** atom numbers."""

    name: str
    atoms: tuple[int, ...]

    @property
    def kind(self) -> str:
        return MONITOR_KINDS[len(self.atoms)]

    @property
    def unit(self) -> str:
        return MONITOR_UNITS[self.kind]

    @property
    def indices(self) -> tuple[int, ...]:
        """0-based atom indices."""
        return tuple(a - 1 for a in self.atoms)

    def label(self) -> str:
        return f"{self.name} ({'-'.join(map(str, self.atoms))})"


@dataclass(frozen=True)
class Condition:
    """One condition on one monitor: ``below`` (v < hi), ``above`` (v > lo) or ``between`` (lo <= v <= hi)."""

    monitor: str
    kind: str
    lo: float | None = None
    hi: float | None = None

    @property
    def wraps(self) -> bool:
        """``between = [lo, hi]`` with lo > hi: a dihedral range across ±180° (v >= lo or v <= hi)."""
        return self.kind == "between" and self.lo > self.hi

    def holds(self, values: np.ndarray) -> np.ndarray:
        v = np.asarray(values)
        if self.kind == "below":
            return v < self.hi
        if self.kind == "above":
            return v > self.lo
        if self.wraps:
            return (v >= self.lo) | (v <= self.hi)
        return (v >= self.lo) & (v <= self.hi)

    def interval(self) -> tuple[float, bool, float, bool]:
        """(lo, lo_closed, hi, hi_closed); for a range across ±180° see :meth:`intervals`."""
        if self.kind == "below":
            return (-math.inf, False, self.hi, False)
        if self.kind == "above":
            return (self.lo, False, math.inf, False)
        return (self.lo, True, self.hi, True)

    def intervals(self) -> list[tuple[float, bool, float, bool]]:
        """The condition as a union of ordinary intervals (two for a range across ±180°)."""
        if self.wraps:
            return [(self.lo, True, 180.0, True), (-180.0, False, self.hi, True)]
        return [self.interval()]

    def describe(self) -> str:
        if self.kind == "below":
            return f"{self.monitor} < {self.hi:g}"
        if self.kind == "above":
            return f"{self.monitor} > {self.lo:g}"
        if self.wraps:
            return f"{self.monitor} >= {self.lo:g} or <= {self.hi:g} (across ±180°)"
        return f"{self.lo:g} <= {self.monitor} <= {self.hi:g}"

    def toml_value(self) -> str:
        if self.kind == "below":
            return f"{{ below = {_num(self.hi)} }}"
        if self.kind == "above":
            return f"{{ above = {_num(self.lo)} }}"
        return f"{{ between = [{_num(self.lo)}, {_num(self.hi)}] }}"


NEAREST_KEY = "nearest"  # the key of nearest-atom conditions in a basin table (so no monitor may be named so)
_NEAREST_KEYS = ("atom", "among", "is", "within")


@dataclass(frozen=True)
class NearestCondition:
    """Atom ``atom``'s nearest neighbour among ``among`` is ``is_`` (and, with ``within``, closer than that, Å).

    Atom numbers are 1-based.  A tie goes to the lowest atom number of the group.  Two basins whose conditions
    name different nearest atoms for the same atom and group can never hold at once."""

    atom: int
    among: tuple[int, ...]
    is_: int
    within: float | None = None

    @property
    def group(self) -> tuple[int, ...]:
        """The group sorted: conditions on the same group compare equal however it was written."""
        return tuple(sorted(self.among))

    @property
    def series_key(self) -> str:
        """Name of the per-frame series (nearest atom number, 1-based) in the prepared monitors."""
        return f"{NEAREST_KEY}:{self.atom}:{','.join(map(str, self.group))}"

    @property
    def distance_key(self) -> str:
        return self.series_key + ":d"

    def holds_in(self, series: Mapping[str, np.ndarray]) -> np.ndarray:
        inside = np.asarray(series[self.series_key]) == self.is_
        if self.within is not None:
            inside &= np.asarray(series[self.distance_key]) < self.within
        return inside

    def separates(self, other: "NearestCondition") -> bool:
        """True when this and ``other`` can never hold at once (same atom and group, another nearest atom)."""
        return self.atom == other.atom and self.group == other.group and self.is_ != other.is_

    def describe(self) -> str:
        group = ", ".join(map(str, self.among))
        within = f" within {self.within:g} Å" if self.within is not None else ""
        return f"atom {self.is_} is the nearest of {group} to atom {self.atom}{within}"

    def toml_value(self) -> str:
        within = f", within = {_num(self.within)}" if self.within is not None else ""
        return (f"{{ atom = {self.atom}, among = [{', '.join(map(str, self.among))}], is = {self.is_}"
                f"{within} }}")


@dataclass(frozen=True)
class Basin:
    name: str
    conditions: tuple[Condition, ...]
    nearest: tuple[NearestCondition, ...] = ()

    def condition(self, monitor: str) -> Condition | None:
        return next((c for c in self.conditions if c.monitor == monitor), None)

    def describe(self) -> str:
        return " and ".join([c.describe() for c in self.conditions] + [n.describe() for n in self.nearest])


@dataclass(frozen=True)
class Overlap:
    """Two basins that can hold at once: where, and one example (monitor values, with any nearest-atom
    conditions both share) at which both hold."""

    first: str
    second: str
    region: str
    example: dict[str, float]

    def example_text(self, monitors: Mapping[str, "Monitor"]) -> str:
        parts = [f"{m} = {v:.3g}{' ' + monitors[m].unit if m in monitors and monitors[m].unit else ''}"
                 for m, v in self.example.items()]
        return ", ".join(parts)


#: what ``allow_overlap = true`` does, said wherever an overlap is reported
ALLOW_OVERLAP_EFFECT = ("with allow_overlap = true, a frame where two basins hold counts in neither (and is flagged "
                        "conflicting_basins), and a run whose end frame lies in both is counted ambiguous, not as a "
                        "product: if most of a product's runs end there, that product's count drops accordingly")


@dataclass(frozen=True)
class FlagLimits:
    """Limits beyond which a run is flagged; None switches a check off."""

    late_commit_fs: float | None = None
    max_energy_drift: float | None = DEFAULT_MAX_DRIFT
    energy_unit: str = "kcal/mol"
    min_length_fs: float | None = None

    @property
    def max_energy_drift_ev(self) -> float | None:
        if self.max_energy_drift is None:
            return None
        return self.max_energy_drift * ENERGY_UNITS[self.energy_unit]


@dataclass(frozen=True)
class TimeGapRule:
    bonds: tuple[str, str]
    form_below: float
    concerted_fs: float = DEFAULT_CONCERTED_FS


@dataclass(frozen=True)
class Rules:
    """A validated rules file.  Treat the dicts as read-only; derive changed rules with
    :meth:`with_threshold` or :func:`dataclasses.replace` + :meth:`validated`."""

    monitors: dict[str, Monitor]
    basins: dict[str, Basin]
    reactant: str
    dwell_fs: float
    flags: FlagLimits = field(default_factory=FlagLimits)
    time_gap: TimeGapRule | None = None
    name: str = ""
    allow_overlap: bool = False
    sha256: str = field(default="", compare=False)
    path: Path | None = field(default=None, compare=False)
    warnings: tuple[str, ...] = field(default=(), compare=False)
    origin: str = field(default="", compare=False)  # where the text came from, for messages

    def __eq__(self, other: object) -> bool:
        """Same content in the same order (basin order sets the track indices); path and hash are ignored."""
        return isinstance(other, Rules) and self.to_toml() == other.to_toml()

    def __hash__(self) -> int:
        return hash(self.to_toml())

    @property
    def basin_names(self) -> list[str]:
        return list(self.basins)

    @property
    def products(self) -> list[str]:
        return [b for b in self.basins if b != self.reactant]

    @property
    def outcome_labels(self) -> list[str]:
        return self.products + ["recrossing", "unfinished"]

    @property
    def source(self) -> str:
        return str(self.path) if self.path else (self.origin or "<rules>")

    def monitor_indices(self) -> dict[str, tuple[int, ...]]:
        """``{name: 0-based indices}`` for :func:`basinmark.core.geometry.monitor_arrays`."""
        return {m.name: m.indices for m in self.monitors.values()}

    def nearest_conditions(self) -> dict[str, NearestCondition]:
        """``{series key: condition}`` of every nearest-atom condition (one entry per atom and group)."""
        out: dict[str, NearestCondition] = {}
        for b in self.basins.values():
            for n in b.nearest:
                out.setdefault(n.series_key, n)
        return out

    # --- checks ------------------------------------------------------------------------------
    def check_atoms(self, n_atoms: int) -> None:
        """Raise RulesError when a monitor or a nearest-atom condition names an atom beyond ``n_atoms``."""
        for m in self.monitors.values():
            for a in m.atoms:
                if a > n_atoms:
                    raise RulesError(self.source, f"atom {a} is out of range: the runs have {n_atoms} atoms "
                                     f"(atoms are numbered from 1)", key=f"monitors.{m.name}")
        for b in self.basins.values():
            for n in b.nearest:
                for a in (n.atom, *n.among):
                    if a > n_atoms:
                        raise RulesError(self.source, f"atom {a} is out of range: the runs have {n_atoms} atoms "
                                         f"(atoms are numbered from 1)", key=f"basins.{b.name}.{NEAREST_KEY}")

    def overlap_pairs(self) -> list["Overlap"]:
        """Every pair of basins that can hold at once, each with the shared region and an example point."""
        out = []
        names = self.basin_names
        for a in range(len(names)):
            for b in range(a + 1, len(names)):
                found = _shared_region(self.basins[names[a]], self.basins[names[b]], self.monitors)
                if found is not None:
                    out.append(Overlap(names[a], names[b], found[0], found[1]))
        return out

    def overlaps(self) -> list[str]:
        """Sentences naming each pair of basins that can hold at once (empty when none)."""
        return [f"basins {o.first!r} and {o.second!r} can both hold at once, where {o.region}; no monitor "
                f"separates them" for o in self.overlap_pairs()]

    def validated(self) -> "Rules":
        """Re-check cross-field consistency (overlap, order of bounds); returns self."""
        _check_semantics(self, self.source)
        return self

    # --- derivation --------------------------------------------------------------------------
    def threshold_target(self, basin: str, monitor: str, bound: str) -> Condition | None:
        """The condition :meth:`with_threshold` would change (None: it would add one); RulesError if impossible."""
        src = self.source
        key = f"basins.{basin}.{monitor}"
        if basin not in self.basins:
            raise RulesError(src, f"no basin {basin!r}; basins are {', '.join(self.basins)}", key=f"basins.{basin}")
        if monitor not in self.monitors:
            raise RulesError(src, f"no monitor {monitor!r}; monitors are {', '.join(self.monitors)}", key=key)
        if bound not in BOUNDS:
            raise RulesError(src, f"bound must be 'below' or 'above', got {bound!r}", key=key)
        old = self.basins[basin].condition(monitor)
        if old is not None and old.kind not in ("between", bound):
            raise RulesError(src, f"this condition is {old.kind!r}, so its {bound!r} bound cannot be set", key=key)
        return old

    def with_threshold(self, basin: str, monitor: str, bound: str, value: float, *, check: bool = True) -> "Rules":
        """Rules with one bound of one basin's condition set to ``value``.

        ``bound`` is "below" (upper limit) or "above" (lower limit); on a ``between`` condition they move
        its hi and lo ends.  A basin without a condition on ``monitor`` gains one.  The result has no path
        and the hash of its canonical TOML text.  ``check=False`` skips the overlap check (sweeps report
        overlap themselves).
        """
        src = self.source
        key = f"basins.{basin}.{monitor}"
        old = self.threshold_target(basin, monitor, bound)
        value = _number(value, src, key)
        b = self.basins[basin]
        if old is None:
            new = Condition(monitor, bound, lo=value if bound == "above" else None,
                            hi=value if bound == "below" else None)
        else:
            new = replace(old, lo=value) if bound == "above" else replace(old, hi=value)
        conds = tuple(new if c.monitor == monitor else c for c in b.conditions)
        if old is None:
            conds = conds + (new,)
        basins = dict(self.basins)
        basins[basin] = Basin(basin, conds)
        out = replace(self, basins=basins, path=None, warnings=(), origin=f"{src} (edited)")
        text = out.to_toml()
        out = replace(out, sha256=hashlib.sha256(text.encode("utf-8")).hexdigest())
        _check_condition(new, self.monitors[monitor], src, key)
        if check:
            _check_semantics(out, src)
        return out

    # --- writing -----------------------------------------------------------------------------
    def to_toml(self) -> str:
        """The rules as TOML text that :func:`parse_rules` reads back to equal rules.

        Written here (a small fixed subset of TOML) because no TOML writer ships with Python.
        """
        lines = []
        if self.name:
            lines.append(f"name = {_str(self.name)}")
        lines.append(f"reactant = {_str(self.reactant)}")
        lines.append(f"dwell_fs = {_num(self.dwell_fs)}")
        if self.allow_overlap:
            lines.append("allow_overlap = true")
        lines += ["", "[monitors]"]
        for m in self.monitors.values():
            lines.append(f"{_key(m.name)} = [{', '.join(map(str, m.atoms))}]")
        for b in self.basins.values():
            lines += ["", f"[basins.{_key(b.name)}]"]
            lines += [f"{_key(c.monitor)} = {c.toml_value()}" for c in b.conditions]
            if len(b.nearest) == 1:
                lines.append(f"{NEAREST_KEY} = {b.nearest[0].toml_value()}")
            elif b.nearest:
                lines.append(f"{NEAREST_KEY} = [{', '.join(n.toml_value() for n in b.nearest)}]")
        lines += ["", "[flags]"]
        f = self.flags
        for k in ("late_commit_fs", "max_energy_drift", "min_length_fs"):
            if getattr(f, k) is not None:
                lines.append(f"{k} = {_num(getattr(f, k))}")
        lines.append(f"energy_unit = {_str(f.energy_unit)}")
        if self.time_gap is not None:
            g = self.time_gap
            lines += ["", "[time_gap]", f"bonds = [{_str(g.bonds[0])}, {_str(g.bonds[1])}]",
                      f"form_below = {_num(g.form_below)}", f"concerted_fs = {_num(g.concerted_fs)}"]
        return "\n".join(lines) + "\n"

    def save(self, path: str | Path, template: str | Path | None = None) -> "Rules":
        """Write the rules to ``path``; returns the rules as loaded from it (with path and hash).

        The text of ``template`` (default: the file at ``path``, when there is one) is kept: its comments,
        order and layout, with only the changed values rewritten (:func:`basinmark.core.rules_keep.keep_text`).
        Without one, or when the rules no longer fit it, :meth:`to_toml` is written; the returned rules then
        carry a warning saying so.
        """
        from basinmark.core.atomic_write import write_text_atomic
        from basinmark.core.rules_keep import keep_text

        p = Path(path)
        src = Path(template) if template is not None else p
        text, why = self.to_toml(), ""
        if src.is_file():
            text, why = keep_text(src.read_text(encoding="utf-8-sig"), self)
        write_text_atomic(p, text, what="the rules file")  # whole or not at all; errors name the file
        out = load_rules(p)
        return replace(out, warnings=out.warnings + (f"{p}: {why}",)) if why else out


# --- TOML writing helpers ------------------------------------------------------------------------

_BARE = re.compile(r"^[A-Za-z0-9_-]+$")


def _str(s: str) -> str:
    """A TOML basic string: backslash, quote and control characters (incl. DEL) escaped."""
    out = []
    for ch in s:
        o = ord(ch)
        if ch in '"\\':
            out.append("\\" + ch)
        elif o < 0x20 or o == 0x7F:
            out.append(f"\\u{o:04x}")
        else:
            out.append(ch)
    return '"' + "".join(out) + '"'


def _key(s: str) -> str:
    return s if _BARE.match(s) else _str(s)


def _num(x: float) -> str:
    x = float(x)
    if math.isnan(x):
        return "nan"
    if math.isinf(x):
        return "inf" if x > 0 else "-inf"
    return repr(x)


# --- loading ---------------------------------------------------------------------------------------

def load_rules(path: str | Path, n_atoms: int | None = None) -> Rules:
    """Read and validate a rules file; ``n_atoms`` also checks atom numbers against the set."""
    p = Path(path)
    try:
        data = p.read_bytes()
    except OSError as exc:
        raise RulesError(p, f"cannot read the rules file ({exc.strerror or exc})") from None
    try:
        text = toml_text.decode(data, p)  # a leading byte-order mark is dropped
    except toml_text.TomlTextError as exc:
        raise RulesError(p, exc.problem, line=exc.line) from None
    rules = parse_rules(text, source=str(p), n_atoms=n_atoms)
    return replace(rules, sha256=hashlib.sha256(data).hexdigest(), path=p)


def parse_rules(text: str, source: str = "<string>", n_atoms: int | None = None) -> Rules:
    """Parse and validate rules from TOML text; ``sha256`` is the hash of the UTF-8 text."""
    if text.startswith(toml_text.BOM):
        text = text[1:]  # the line scans below see the text as parsed
    try:
        doc = toml_text.loads(text, source)
    except toml_text.TomlTextError as exc:
        raise RulesError(source, f"TOML syntax error: {exc.detail}", line=exc.line) from None
    b = _Builder(source, text)
    rules = b.build(doc)
    rules = replace(rules, sha256=hashlib.sha256(text.encode("utf-8")).hexdigest(), warnings=tuple(b.warnings),
                    origin=source)
    if n_atoms is not None:
        rules.check_atoms(n_atoms)
    return rules


def _number(v: Any, source: str, key: str) -> float:
    if isinstance(v, bool) or not isinstance(v, (int, float, np.integer, np.floating)):
        raise RulesError(source, f"must be a number, got {v!r}", key=key)
    x = float(v)
    if math.isnan(x):
        raise RulesError(source, "must be a number, got nan", key=key)
    return x


class _Builder:
    def __init__(self, source: str, text: str):
        self.source = source
        self.text = text
        self.warnings: list[str] = []

    def err(self, problem: str, key: str) -> RulesError:
        return RulesError(self.source, problem, key=key, line=_find_line(self.text, key))

    def num(self, v: Any, key: str, minimum: float | None = None) -> float:
        try:
            x = _number(v, self.source, key)
        except RulesError as e:
            raise self.err(e.problem, key) from None
        if minimum is not None and x < minimum:
            raise self.err(f"must be at least {minimum:g}, got {x:g}", key)
        if math.isinf(x):
            raise self.err("must be finite", key)
        return x

    def unknown(self, table: Mapping, allowed, prefix: str) -> None:
        """Refuse a key not in ``allowed``, naming the nearest valid key: a typo would otherwise silently
        fall back to a default."""
        for k in table:
            if k not in allowed:
                raise self.err(f"unknown key {k!r}{did_you_mean(k, allowed)}; the keys here are "
                               f"{', '.join(allowed)}", f"{prefix}{k}")

    def build(self, doc: dict) -> Rules:
        self.unknown(doc, _TOP_KEYS, "")
        name = doc.get("name", "")
        if not isinstance(name, str):
            raise self.err(f"must be a string, got {name!r}", "name")
        monitors = self.monitors(doc.get("monitors"))
        basins = self.basins(doc.get("basins"), monitors)
        reactant = doc.get("reactant", "reactant")
        if not isinstance(reactant, str):
            raise self.err(f"must be a basin name (a string), got {reactant!r}", "reactant")
        if reactant not in basins:
            raise self.err(f"the reactant {reactant!r} is not a basin{did_you_mean(reactant, basins)}; basins are "
                           f"{', '.join(basins)}", "reactant")
        if len(basins) < 2:
            raise self.err("needs at least one product basin besides the reactant", "basins")
        if "dwell_fs" in doc:
            dwell = self.num(doc["dwell_fs"], "dwell_fs", minimum=0.0)
        else:
            dwell = DEFAULT_DWELL_FS
            self.warnings.append(f"{self.source}: dwell_fs is not given; using the default {DEFAULT_DWELL_FS:g} fs "
                                 "(docs/rules-file.md says why)")
        allow = doc.get("allow_overlap", False)
        if not isinstance(allow, bool):
            raise self.err(f"must be true or false, got {allow!r}", "allow_overlap")
        flags = self.flags(doc.get("flags", {}))
        gap = self.time_gap(doc.get("time_gap"), monitors)
        rules = Rules(monitors=monitors, basins=basins, reactant=reactant, dwell_fs=dwell, flags=flags,
                      time_gap=gap, name=name, allow_overlap=allow)
        try:
            _check_semantics(rules, self.source)
        except RulesError as e:
            raise self.err(e.problem, e.key or "basins") from None
        return rules

    def monitors(self, table: Any) -> dict[str, Monitor]:
        if not isinstance(table, dict) or not table:
            raise self.err("a [monitors] table with at least one monitor is required", "monitors")
        out = {}
        for name, atoms in table.items():
            key = f"monitors.{name}"
            if name == NEAREST_KEY:
                raise self.err(f"{NEAREST_KEY!r} is the word of nearest-atom conditions; name the monitor otherwise",
                               key)
            if not isinstance(atoms, list) or not all(isinstance(a, int) and not isinstance(a, bool) for a in atoms):
                raise self.err(f"must be a list of 1-based atom numbers, got {atoms!r}", key)
            if len(atoms) not in MONITOR_KINDS:
                raise self.err(f"needs 2 atoms (distance), 3 (angle) or 4 (dihedral), got {len(atoms)}", key)
            if any(a < 1 for a in atoms):
                raise self.err(f"atom numbers start at 1, got {atoms}", key)
            if len(set(atoms)) != len(atoms):
                raise self.err(f"an atom is repeated in {atoms}", key)
            out[name] = Monitor(name, tuple(atoms))
        return out

    def basins(self, table: Any, monitors: dict[str, Monitor]) -> dict[str, Basin]:
        if not isinstance(table, dict) or not table:
            raise self.err("[basins.NAME] tables are required (the reactant and at least one product)", "basins")
        out = {}
        for bname, conds in table.items():
            bkey = f"basins.{bname}"
            problem = basin_name_problem(bname, list(out))
            if problem is not None:
                raise self.err(problem, bkey)
            if not isinstance(conds, dict):
                raise self.err("must be a table of conditions", bkey)
            if not conds:
                raise self.err("has no conditions", bkey)
            items, nearest = [], []
            for mname, spec in conds.items():
                key = f"{bkey}.{mname}"
                if mname == NEAREST_KEY:
                    specs = spec if isinstance(spec, list) else [spec]
                    nearest += [self.nearest(x, key) for x in specs]
                    continue
                if mname not in monitors:
                    raise self.err(f"unknown monitor {mname!r}{did_you_mean(mname, monitors)}; monitors are "
                                   f"{', '.join(monitors)}", key)
                items.append(self.condition(mname, spec, key, monitors[mname]))
            out[bname] = Basin(bname, tuple(items), tuple(nearest))
        return out

    def nearest(self, spec: Any, key: str) -> NearestCondition:
        form = "{ atom = A, among = [B, C, ...], is = B } (optionally within = d, in Å)"
        if not isinstance(spec, dict):
            raise self.err(f"a nearest-atom condition is written {form}; got {spec!r}", key)
        self.unknown(spec, _NEAREST_KEYS, f"{key}.")
        for k in ("atom", "among", "is"):
            if k not in spec:
                raise self.err(f"the nearest-atom condition lacks {k!r}: write {form}", key)

        def atom_no(v: Any, what: str) -> int:
            if isinstance(v, bool) or not isinstance(v, int) or v < 1:
                raise self.err(f"{what} must be an atom number from 1, got {v!r}", key)
            return v

        atom = atom_no(spec["atom"], "atom")
        among = spec["among"]
        if not isinstance(among, list) or len(among) < 2:
            raise self.err(f"among must list at least two atoms to choose from, got {among!r}", key)
        among = tuple(atom_no(a, "each atom of among") for a in among)
        if len(set(among)) != len(among):
            raise self.err(f"an atom is listed twice in among = {list(among)}", key)
        if atom in among:
            raise self.err(f"atom {atom} is among its own candidates {list(among)}; its nearest neighbour would "
                           "always be itself", key)
        is_ = atom_no(spec["is"], "is")
        if is_ not in among:
            raise self.err(f"is = {is_} is not one of among = {list(among)}", key)
        within = None
        if "within" in spec:
            within = self.num(spec["within"], f"{key}.within", minimum=0.0)
            if within <= 0:
                raise self.err(f"within must be a distance above 0 Å, got {within:g}", f"{key}.within")
        return NearestCondition(atom, among, is_, within)

    def condition(self, mname: str, spec: Any, key: str, monitor: Monitor) -> Condition:
        if not isinstance(spec, dict) or len(spec) != 1:
            raise self.err("must be one of { below = x }, { above = x }, { between = [lo, hi] }", key)
        (kind, v), = spec.items()
        if kind == "below":
            c = Condition(mname, "below", hi=self.num(v, f"{key}.below"))
        elif kind == "above":
            c = Condition(mname, "above", lo=self.num(v, f"{key}.above"))
        elif kind == "between":
            if not isinstance(v, list) or len(v) != 2:
                raise self.err(f"must be a list [lo, hi] of two numbers, got {v!r}", f"{key}.between")
            lo, hi = (self.num(x, f"{key}.between") for x in v)
            c = Condition(mname, "between", lo=lo, hi=hi)
        else:
            raise self.err(f"unknown condition {kind!r}{did_you_mean(kind, _CONDITION_KINDS)}; use below, above or "
                           "between", key)
        try:
            _check_condition(c, monitor, self.source, key)
        except RulesError as e:
            raise self.err(e.problem, key) from None
        return c

    def flags(self, table: Any) -> FlagLimits:
        if not isinstance(table, dict):
            raise self.err("must be a table", "flags")
        self.unknown(table, _FLAG_KEYS, "flags.")
        unit = table.get("energy_unit", "kcal/mol")
        canon = next((u for u in ENERGY_UNITS if isinstance(unit, str) and u.lower() == unit.strip().lower()), None)
        if canon is None:
            raise self.err(f"unknown energy unit {unit!r}; use one of {', '.join(ENERGY_UNITS)}", "flags.energy_unit")
        vals = {}
        for k in ("late_commit_fs", "max_energy_drift", "min_length_fs"):
            if k in table:
                vals[k] = self.num(table[k], f"flags.{k}", minimum=0.0)
        return FlagLimits(energy_unit=canon, **vals)

    def time_gap(self, table: Any, monitors: dict[str, Monitor]) -> TimeGapRule | None:
        if table is None:
            return None
        if not isinstance(table, dict):
            raise self.err("must be a table", "time_gap")
        self.unknown(table, _GAP_KEYS, "time_gap.")
        bonds = table.get("bonds")
        if not isinstance(bonds, list) or len(bonds) != 2 or not all(isinstance(b, str) for b in bonds):
            raise self.err(f"must name two distance monitors, e.g. [\"r_a\", \"r_b\"]; got {bonds!r}",
                           "time_gap.bonds")
        for b in bonds:
            if b not in monitors:
                raise self.err(f"unknown monitor {b!r}{did_you_mean(b, monitors)}; monitors are "
                               f"{', '.join(monitors)}", "time_gap.bonds")
            if monitors[b].kind != "distance":
                raise self.err(f"monitor {b!r} is an {monitors[b].kind}, not a distance", "time_gap.bonds")
        if bonds[0] == bonds[1]:
            raise self.err("must name two different monitors", "time_gap.bonds")
        if "form_below" not in table:
            raise self.err("is missing: the distance (Å) below which a bond has formed", "time_gap.form_below")
        form = self.num(table["form_below"], "time_gap.form_below", minimum=0.0)
        conc = self.num(table.get("concerted_fs", DEFAULT_CONCERTED_FS), "time_gap.concerted_fs", minimum=0.0)
        return TimeGapRule((bonds[0], bonds[1]), form, conc)


# --- semantic checks ---------------------------------------------------------------------------------

def _nonempty(lo: float, lo_c: bool, hi: float, hi_c: bool) -> bool:
    return lo < hi or (lo == hi and lo_c and hi_c)


def _intersect(a: tuple, b: tuple) -> tuple:
    lo, lo_c = max((a[0], a[1]), (b[0], b[1]), key=lambda t: (t[0], not t[1]))
    hi, hi_c = min((a[2], a[3]), (b[2], b[3]), key=lambda t: (t[0], t[1]))
    return (lo, lo_c, hi, hi_c)


def _check_condition(c: Condition, m: Monitor, source: str, key: str) -> None:
    if c.kind == "between" and c.lo > c.hi and m.kind != "dihedral":
        raise RulesError(source, f"between [{c.lo:g}, {c.hi:g}] is not ordered (lo must not exceed hi; only for a "
                                 "dihedral does lo > hi mean a range across ±180°)", key=key)
    dom = _DOMAINS[m.kind]
    if not any(_nonempty(*_intersect(iv, dom)) for iv in c.intervals()):
        raise RulesError(source, f"{c.describe()} can never hold for a {m.kind} "
                         f"({m.unit} values from {dom[0]:g} to {dom[2]:g})", key=key)


def _fmt_interval(name: str, iv: tuple, unit: str, domain: tuple) -> str:
    lo, lo_c, hi, hi_c = iv
    u = f" {unit}" if unit else ""
    if lo == hi:
        return f"{name} = {lo:g}{u}"
    has_lo = not (math.isinf(lo) or (lo, lo_c) == (domain[0], domain[1]))
    has_hi = not (math.isinf(hi) or (hi, hi_c) == (domain[2], domain[3]))
    if has_lo and has_hi:
        return f"{lo:g} {'<=' if lo_c else '<'} {name} {'<=' if hi_c else '<'} {hi:g}{u}"
    if has_lo:
        return f"{name} {'>=' if lo_c else '>'} {lo:g}{u}"
    if has_hi:
        return f"{name} {'<=' if hi_c else '<'} {hi:g}{u}"
    return f"{name} any value"


def _example(region: list[tuple], m: Monitor) -> float:
    """One value inside a union of intervals (the first), away from its edges where it can be."""
    lo, lo_c, hi, hi_c = region[0]
    dom = _DOMAINS[m.kind]
    lo, hi = max(lo, dom[0]), min(hi, dom[2])
    if math.isinf(hi):
        hi = lo + (1.0 if m.kind == "distance" else 20.0)
    if lo == hi:
        return float(lo)
    return float((lo + hi) / 2.0)


def _shared_region(a: Basin, b: Basin, monitors: Mapping[str, Monitor]) -> tuple[str, dict[str, float]] | None:
    """Where both basins hold (a description and one example of monitor values), or None when a monitor or a
    nearest-atom condition separates them."""
    if any(na.separates(nb) for na in a.nearest for nb in b.nearest):
        return None
    parts, example = [], {}
    for mname in dict.fromkeys([c.monitor for c in a.conditions] + [c.monitor for c in b.conditions]):
        m = monitors[mname]
        region = [_DOMAINS[m.kind]]  # a union of intervals (a range across ±180° is two)
        for basin in (a, b):
            c = basin.condition(mname)
            if c is not None:
                region = [_intersect(r, iv) for r in region for iv in c.intervals()]
        region = [r for r in region if _nonempty(*r)]
        if not region:
            return None
        parts.append(" or ".join(_fmt_interval(mname, r, m.unit, _DOMAINS[m.kind]) for r in region))
        example[mname] = _example(region, m)
    parts += [n.describe() for n in dict.fromkeys(a.nearest + b.nearest)]
    return ", ".join(parts) or "any geometry (neither has a condition)", example


def overlap_message(rules: Rules) -> str | None:
    """The refusal of overlapping basins: every overlapping pair with one example where both hold, and what
    ``allow_overlap = true`` would do to the counts; None when no two basins overlap."""
    pairs = rules.overlap_pairs()
    if not pairs:
        return None
    lines = []
    for o in pairs:
        ex = o.example_text(rules.monitors)
        lines.append(f"{o.first!r} and {o.second!r} where {o.region}" + (f" (e.g. a frame with {ex})" if ex else ""))
    head = ("2 basins can both hold at once" if len(pairs) == 1
            else f"{len(pairs)} pairs of basins can both hold at once")
    return (f"{head}, and no monitor separates them: " + "; ".join(lines) + ". Tighten a condition (a "
            "nearest-atom condition tells equivalent partners apart without overlap), or accept it: "
            + ALLOW_OVERLAP_EFFECT + ".")


def _check_semantics(rules: Rules, source: str) -> None:
    for name in rules.basins:
        problem = basin_name_problem(name, list(rules.basins))
        if problem is not None:
            raise RulesError(source, problem, key=f"basins.{name}")
    if rules.reactant not in rules.basins:
        raise RulesError(source, f"the reactant {rules.reactant!r} is not a basin", key="reactant")
    if not rules.products:
        raise RulesError(source, "needs at least one product basin besides the reactant", key="basins")
    for b in rules.basins.values():
        for c in b.conditions:
            _check_condition(c, rules.monitors[c.monitor], source, f"basins.{b.name}.{c.monitor}")
    if not rules.allow_overlap:
        problem = overlap_message(rules)
        if problem:
            raise RulesError(source, problem, key="basins")


def _find_line(text: str, key: str) -> int | None:
    """Best-effort line of a dotted key path (for messages only)."""
    parts = key.split(".")
    table: list[str] = []
    header = re.compile(r"^\s*\[\s*([^\[\]]+?)\s*\]\s*(#.*)?$")
    assign = re.compile(r"^\s*(\"[^\"]*\"|[A-Za-z0-9_-]+)\s*=")
    for no, line in enumerate(text.splitlines(), 1):
        h = header.match(line)
        if h:
            table = [p.strip().strip('"') for p in h.group(1).split(".")]
            if table == parts:
                return no
            continue
        a = assign.match(line)
        if a:
            full = table + [a.group(1).strip('"')]
            if full == parts[:len(full)] and len(full) >= min(len(parts), len(table) + 1):
                return no
    return None
