"""Which files of a set folder make which run: half names, one folder per run, or a manifest's patterns.

Without ``[files]`` patterns in the manifest, runs are found by the conventions people use for the two
halves of a run started at a transition state (any case, on any trajectory file ``.xyz``, ``.extxyz``,
``.traj``, optionally ``.gz``/``.bz2``/``.xz``):

* a word for the direction at the end or the start of the name, set off by ``.``, ``_``, ``-`` or a
  space: ``run_001_fwd.xyz``/``run_001_bwd.xyz``, ``run-7.forward.xyz``/``run-7.back.xyz``,
  ``fwd_12.xyz``/``bwd_12.xyz`` (words in :data:`FORWARD_WORDS` and :data:`BACKWARD_WORDS`);
* one folder per run, the halves named by the word alone: ``run001/fwd.xyz``, ``run001/bwd.xyz``;
* any other trajectory file is a joined run (backward and forward in one file) until reading says
  otherwise (a single frame, or other atoms, is left out by :mod:`basinmark.core.sets`).

Folders looked in: those of the manifest (default the set folder and ``runs/``) and, for one folder per
run, each of their sub-folders.  Every decision is returned as a sentence: what was paired and how
(:attr:`Pairing.notes`) and which files were left out and why (:attr:`Pairing.left_out`).
"""

from __future__ import annotations

import hashlib
import os
import re
from collections import Counter, defaultdict
from dataclasses import dataclass, field
from pathlib import Path

from basinmark.core.model import LoadFailure

#: words that mark a forward half (compared without case)
FORWARD_WORDS = ("fwd", "fw", "forward", "forwards", "frwd", "fwrd")
#: words that mark a backward half (compared without case)
BACKWARD_WORDS = ("bwd", "bw", "backward", "backwards", "back", "bck", "bkwd", "rev", "reverse", "reversed")

TRAJECTORY_SUFFIXES = (".xyz", ".extxyz", ".traj")
COMPRESSION_SUFFIXES = (".gz", ".bz2", ".xz")
_SKIP_FOLDERS = {".basinmark-cache", "__pycache__"}

_WORDS = "|".join(sorted(FORWARD_WORDS + BACKWARD_WORDS, key=len, reverse=True))
_SEP = r"[._\- ]+"
_AT_END = re.compile(rf"^(?P<run>.*?[^._\- ])(?:{_SEP}|(?<=\d))(?P<word>{_WORDS})$", re.IGNORECASE)
_AT_START = re.compile(rf"^(?P<word>{_WORDS})(?:{_SEP}|(?=\d))(?P<run>[^._\- ].*)$", re.IGNORECASE)
_ALONE = re.compile(rf"^(?P<word>{_WORDS})$", re.IGNORECASE)


@dataclass
class RunSpec:
    """The files that make one run."""

    run_id: str
    backward: Path | None = None
    forward: Path | None = None
    joined: Path | None = None

    @property
    def files(self) -> list[Path]:
        return [p for p in (self.backward, self.forward, self.joined) if p is not None]


@dataclass
class Pairing:
    runs: list[RunSpec]
    left_out: list[LoadFailure] = field(default_factory=list)
    notes: list[str] = field(default_factory=list)
    #: convention ("own", "names", "folders", "joined", "patterns") -> the runs found by it
    conventions: dict = field(default_factory=dict)
    #: True when every run follows this project's own naming (``<run>.bwd.*``/``<run>.fwd.*``, joined
    #: ``<run>.xyz``) or a manifest's patterns, so that the pairing needs no mention on screen
    plain: bool = True
    #: digest of the names that can make runs, folder by folder (:func:`listing_digest`)
    listing: str = ""


_DIGIT_RUNS = re.compile(r"(\d+)")


def natural_key(text: str):
    return [(0, int(tok), "") if tok.isdigit() else (1, 0, tok) for tok in _DIGIT_RUNS.split(text)]


def _suffix_pattern() -> re.Pattern:
    fmts = "|".join(re.escape(f) for f in TRAJECTORY_SUFFIXES)
    comps = "|".join(re.escape(c) for c in COMPRESSION_SUFFIXES)
    return re.compile(rf"(?P<stem>.+?)(?P<suffix>(?:{fmts})(?:{comps})?)", re.IGNORECASE | re.DOTALL)


_SUFFIX = _suffix_pattern()


def split_name(name: str) -> tuple[str, str] | None:
    """``(stem, suffix)`` of a trajectory file name (``run_1_fwd``, ``.xyz.gz``), or None for other files.

    One regular expression (a name with a format suffix, optionally a compression suffix after it, and something
    before them): a quarter of the time of trying the suffixes one by one, at 30,000 names."""
    m = _SUFFIX.fullmatch(name)
    return (m.group("stem"), m.group("suffix")) if m else None


def half_of(stem: str) -> tuple[str, str] | None:
    """``(role, run part)`` when a file stem names a half (run part "" for the word alone), else None."""
    for rx in (_ALONE, _AT_END, _AT_START):
        m = rx.match(stem)
        if m:
            word = m.group("word").lower()
            role = "forward" if word in FORWARD_WORDS else "backward"
            return role, (m.groupdict().get("run") or "")
    return None


def _folders(root: Path, names) -> list[Path]:
    seen: list[Path] = []
    for name in names:
        base = (root / name).resolve()
        if base.is_dir() and base not in seen:
            seen.append(base)
    return seen


def _entries(folder: Path) -> list[tuple[str, bool, bool, bool]]:
    """(name, is a file, is a folder, is a symbolic link) of each entry not hidden, by name: one ``scandir``, whose
    entries know their type without a ``stat`` each (measured: half of finding the runs of 2,000 runs went to
    sorting paths and to one ``stat`` per file)."""
    try:
        with os.scandir(folder) as it:
            items = [(e.name, e.is_file(), e.is_dir(), e.is_symlink()) for e in it if not e.name.startswith(".")]
    except OSError:
        return []
    items.sort()
    return items


def _child(folder: Path, name: str) -> Path:
    # a name from a listing is one part: pathlib's own shortcut for that skips parsing it again (half the time of
    # making 20,000 paths, measured); plain joining where a Python lacks it
    make = getattr(folder, "_make_child_relpath", None)
    return make(name) if make is not None else folder / name


def _walk(bases: list[Path], nested: bool, skip_bases: bool) -> list[tuple[Path, Path, str, str]]:
    """``(base, folder, prefix, name)`` of each file the finders look at, in listing order: the files of each base
    folder (prefix ``""``) and, with ``nested``, those of each of its sub-folders (prefix ``"sub/"``; with
    ``skip_bases``, not of a sub-folder that is itself a base).  Names only: paths are made for what is kept."""
    out: list[tuple[Path, Path, str, str]] = []
    for base in bases:
        for name, is_file, is_dir, is_link in _entries(base):
            if is_file:
                out.append((base, base, "", name))
            elif is_dir and nested and name not in _SKIP_FOLDERS:
                sub = _child(base, name)
                # a base is listed as itself; a link to one (runs kept elsewhere, linked into the set folder) is
                # that base too: listed again, every file was found twice (each run twice, or every file left out)
                if skip_bases and (sub in bases or is_link and sub.resolve() in bases):
                    continue
                out.extend((base, sub, name + "/", f) for f, f_is_file, _, _ in _entries(sub) if f_is_file)
    return out


class _Digest:
    """SHA-256 of the names that can make runs, folder by folder: equal digests, equal runs found (what the quick
    open's record relies on, see core/quick_open.py).  Names are added in listing order; a folder's are hashed
    together (a name holds no '/' and no NUL, a folder's path starts with one: no ambiguity)."""

    def __init__(self) -> None:
        self._hash = hashlib.sha256(b"basinmark listing 1\n")
        self._folder: Path | None = None
        self._names: list[str] = []

    def add(self, folder: Path, name: str) -> None:
        if folder is not self._folder:
            self._flush()
            self._folder = folder
        self._names.append(name)

    def _flush(self) -> None:
        if self._folder is not None:
            self._hash.update(os.fsencode("\0" + str(self._folder) + "\0" + "\0".join(self._names)))
        self._names = []

    def hexdigest(self) -> str:
        self._flush()
        return self._hash.hexdigest()


def _digest(files: list[tuple[Path, Path, str, str]], every: bool) -> str:
    """The :class:`_Digest` of trajectory files (``every`` file, for manifest patterns) of a walk.  Other files
    (the label journal, its lock, the rules) change nothing."""
    digest = _Digest()
    for _base, folder, _prefix, name in files:
        if every or split_name(name) is not None:
            digest.add(folder, name)
    return digest.hexdigest()


def listing_digest(root: Path, layout) -> str:
    """The digest (:func:`_digest`) of what the finder of this layout would list now, without pairing anything
    (about a tenth of the time of finding the runs: one ``scandir`` per folder, no paths per file)."""
    bases = _folders(root, layout.folders)
    if layout.patterns_given:
        return _digest(_walk(bases, layout.nested, skip_bases=False), every=True)
    return _digest(_walk(bases, True, skip_bases=True), every=False)


@dataclass
class _Group:
    folder: Path
    part: str  # run part of the names ("" for a folder whose halves are named by the word alone)
    files: dict = field(default_factory=dict)  # role -> Path
    extra: list = field(default_factory=list)  # (role, Path) of second files for a role


def find_by_names(root: Path, folders) -> Pairing:
    """Runs found by the naming conventions above (no manifest patterns)."""
    bases = _folders(root, folders)
    files = _walk(bases, True, skip_bases=True)
    digest = _Digest()  # as listing_digest() gives it, from the same walk (the names are split here anyway)
    groups: dict[tuple[Path, str, str], _Group] = {}
    for _base, folder, _prefix, name in files:
        split = split_name(name)
        if split is None:
            continue
        digest.add(folder, name)
        path = _child(folder, name)
        stem = split[0]
        half = half_of(stem)
        kind, role, part = ("halves", half[0], half[1]) if half else ("joined", "joined", stem)
        g = groups.setdefault((folder, part.lower() if kind == "halves" else part, kind), _Group(folder, part))
        if role in g.files:
            g.extra.append((role, path))
        else:
            g.files[role] = path
    # run ids: the run part of the names; the folder's name where the names carry none (one folder per
    # run) or where the same run part recurs in several folders
    per_folder = Counter(folder for folder, _, _ in groups)
    by_part: dict[str, list] = defaultdict(list)
    for key in groups:
        by_part[key[1].lower()].append(key)
    ids: dict[tuple, str] = {}
    for key in groups:
        folder, part, _kind = key
        clash = bool(part) and len({k[0] for k in by_part[part.lower()]}) > 1
        if part and not clash:
            ids[key] = groups[key].part
        elif folder not in bases and per_folder[folder] == 1:
            ids[key] = folder.name
        elif part:
            ids[key] = f"{folder.name}/{groups[key].part}"
        else:
            ids[key] = folder.name
    pairing = _assemble(root, groups, ids)
    pairing.listing = digest.hexdigest()
    return pairing


def _assemble(root: Path, groups: dict, ids: dict) -> Pairing:
    left: list[LoadFailure] = []
    specs: dict[str, RunSpec] = {}
    kinds: dict[str, list] = defaultdict(list)  # convention -> run ids
    # each run id's place in natural order, found once (two sorts comparing natural keys cost twice that)
    order = {rid: i for i, rid in enumerate(sorted(set(ids.values()), key=natural_key))}
    folder_names: dict[int, str] = {}  # id(folder) -> its name (one Path.name per folder, not per run)
    backward_folder: dict[str, str] = {}  # run id -> name of the folder its backward half was found in
    for key in sorted(groups, key=lambda k: order[ids[k]]):
        g, rid = groups[key], ids[key]
        for role, path in g.extra:
            left.append(LoadFailure(path, f"{path}: run {rid} already has a {role} file "
                                          f"({g.files[role].name}); this one is left out"))
        spec = specs.setdefault(rid, RunSpec(rid))
        for role, path in g.files.items():
            if getattr(spec, role) is not None:
                left.append(LoadFailure(path, f"{path}: run {rid} already has a {role} file "
                                              f"({getattr(spec, role).name}); this one is left out"))
                continue
            setattr(spec, role, path)
            if role == "backward":
                fname = folder_names.get(id(g.folder))
                if fname is None:
                    fname = folder_names[id(g.folder)] = g.folder.name
                backward_folder[rid] = fname
    runs: list[RunSpec] = []
    for rid in sorted(specs, key=order.__getitem__):
        spec = specs[rid]
        if spec.joined is not None and (spec.backward or spec.forward):
            left.append(LoadFailure(spec.joined, f"{spec.joined}: run {rid} has both a joined file and halves; "
                                                 "the halves are used"))
            spec.joined = None
        if spec.joined is None and (spec.backward is None) != (spec.forward is None):
            have = spec.backward or spec.forward
            missing = "forward" if spec.forward is None else "backward"
            left.append(LoadFailure(have, f"{have}: run {rid} has no {missing} half, so it is not a run "
                                          f"(a run needs both halves)"))
            continue
        runs.append(spec)
        kinds[_convention(root, spec, backward_folder.get(rid))].append(spec)
    return Pairing(runs, left, describe(kinds), dict(kinds), plain=set(kinds) <= {"own", "joined"})


def describe(conventions: dict, keep=None) -> list[str]:
    """One sentence per way runs were found; ``keep`` (run ids) limits the count to runs finally kept."""
    notes = []
    for kind, members in conventions.items():
        members = [m for m in members if keep is None or m.run_id in keep]
        if members:
            notes.append(_describe(kind, members))
    return notes


def _convention(root: Path, spec: RunSpec, folder_name: str | None = None) -> str:
    """How a run was found; ``folder_name``: the name of the folder holding its backward half, when known."""
    if spec.joined is not None:
        return "joined"
    name = spec.backward.name
    stem = split_name(name)[0]
    if folder_name is None:
        # the folder's name from the path's text (Path.parent builds a path per run: 10,000 of them are felt)
        folder_name = os.path.basename(os.path.dirname(str(spec.backward)))
    if _ALONE.match(stem) or folder_name == spec.run_id:
        return "folders"
    if ".bwd." in name and ".fwd." in spec.forward.name:
        return "own"
    return "names"


def _rel(root: Path, path: Path) -> str:
    try:
        return path.relative_to(root.resolve()).as_posix()
    except ValueError:
        return str(path)


def _describe(kind: str, members: list[RunSpec]) -> str:
    n = len(members)
    first = members[0]
    runs = f"{n} run{'s' if n != 1 else ''}"
    if kind == "patterns":
        return f"{runs} found by the [files] patterns of the manifest, e.g. {', '.join(p.name for p in first.files)}"
    if kind == "joined":
        return f"{runs} read from single files holding both halves (joined), e.g. {first.joined.name}"
    if kind == "own":
        return f"{runs} paired from halves named <run>.bwd.* + <run>.fwd.*, e.g. {first.backward.name}"
    if kind == "folders":
        return (f"{runs} found as one folder per run, each holding both halves, e.g. "
                f"{first.backward.parent.name}/{first.backward.name} + {first.forward.parent.name}/"
                f"{first.forward.name}")
    return (f"{runs} paired from halves named for their direction, e.g. {first.backward.name} (backward) + "
            f"{first.forward.name} (forward)")


def find_by_patterns(root: Path, layout) -> Pairing:
    """Runs found by a manifest's ``[files]`` patterns (matched against names, or relative paths with ``/``)."""
    bases = _folders(root, layout.folders)
    groups: dict[tuple[Path, str, str], _Group] = {}
    ids: dict[tuple, str] = {}
    files = _walk(bases, layout.nested, skip_bases=False)
    resolved = root.resolve()
    for base, folder, prefix, name in files:
        hit = layout.role_of(prefix + name)
        if hit is None:
            continue
        path = _child(folder, name)
        role, rid = hit
        kind = "joined" if role == "joined" else "halves"
        key = (resolved, rid, kind)
        g = groups.setdefault(key, _Group(base, rid))
        ids[key] = rid
        if role in g.files:
            g.extra.append((role, path))
        else:
            g.files[role] = path
    pairing = _assemble(root, groups, ids)
    pairing.conventions = {"patterns": list(pairing.runs)}
    pairing.notes = describe(pairing.conventions)
    pairing.plain = True
    pairing.listing = _digest(files, every=True)
    return pairing
