"""The optional set manifest ``basinmark-set.toml``: how the files of a set are laid out.

Without a manifest, a set uses :data:`DEFAULT`.  A manifest may override any key::

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
    [tst]                           # the study's own TST estimate, shown beside the observed ratio
    ddg = 0.3                       # ΔΔG‡ = G‡(minor) − G‡(major), from separate transition states
    unit = "kcal/mol"
    temperature = 298.15
    source = "where the number comes from"

The manifest is data only; nothing in it is ever evaluated.
"""

from __future__ import annotations

import copy
import fnmatch
import hashlib
import json
import re
import tomllib
from dataclasses import dataclass
from pathlib import Path

from basinmark.core.errors import SetError
from basinmark.core.units import energy_factor, length_factor, time_factor

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
    "tst": {"ddg": None, "unit": "kcal/mol", "temperature": 298.15, "source": ""},
}

_TOP_KEYS = {"name", "files", "units", "keys", "time", "tst"}


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
    tst: dict | None = None  # {"ddg", "unit", "temperature", "source"} when the manifest gives a ΔΔG‡
    patterns_given: bool = False  # the manifest names file patterns; else runs are found by naming conventions

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


def _tst(table: dict, path: Path) -> dict | None:
    if table["ddg"] is None:
        return None
    try:
        ddg, temperature = float(table["ddg"]), float(table["temperature"])
        energy_factor(str(table["unit"]))
    except (TypeError, ValueError) as exc:
        raise SetError(f"{path}: [tst] {exc}") from None
    if not temperature > 0:
        raise SetError(f"{path}: [tst] temperature must be a positive number of kelvin")
    return {"ddg": ddg, "unit": str(table["unit"]), "temperature": temperature, "source": str(table["source"])}


def load_layout(root: str | Path) -> SetLayout:
    """Read ``basinmark-set.toml`` from ``root`` if present, else the defaults."""
    root = Path(root)
    path = root / MANIFEST_NAME
    raw: dict = {}
    if path.exists():
        try:
            raw = tomllib.loads(path.read_text(encoding="utf-8"))
        except tomllib.TOMLDecodeError as exc:
            raise SetError(f"{path}: not valid TOML: {exc}") from None
        except UnicodeDecodeError:
            raise SetError(f"{path}: not UTF-8 text") from None
    cfg = _merge(DEFAULT, raw, str(path))
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
            tst=_tst(cfg["tst"], path),
            patterns_given=any(k in raw.get("files", {}) for k in ("backward", "forward", "joined")),
        )
    except (ValueError, TypeError) as exc:
        raise SetError(f"{path}: {exc}") from None
    if layout.backward_time not in ("auto", "elapsed", "signed"):
        raise SetError(f"{path}: [time] backward must be auto, elapsed or signed, not {layout.backward_time!r}")
    if layout.step_fs is not None and not layout.step_fs > 0:
        raise SetError(f"{path}: [time] step_fs must be a positive number of fs")
    return layout
