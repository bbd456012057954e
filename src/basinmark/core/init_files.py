"""The files `basinmark init` writes (a commented manifest, proposed rules), its report, and accepting the rules.

The proposed rules go to ``basins.proposed.toml``, never straight to ``basins.toml``: nothing is classified
on rules chosen by numbers until the chemist has looked at them and accepted them
(:func:`accept_proposal`, ``basinmark init FOLDER --accept``, or the window's offer).
"""

from __future__ import annotations

import getpass
import os
from collections import Counter
from datetime import datetime, timezone
from pathlib import Path

from basinmark.core.errors import SetError
from basinmark.core.init_inspect import Findings
from basinmark.core.init_propose import rules_text
from basinmark.core.manifest import MANIFEST_NAME

PROPOSED_NAME = "basins.proposed.toml"
RULES_NAME = "basins.toml"
_PROPOSED_MARK = "# Rules PROPOSED by `basinmark init`"


def _toml_str(s: str) -> str:
    return '"' + s.replace("\\", "\\\\").replace('"', '\\"') + '"'


def manifest_text(f: Findings) -> str:
    """A commented ``basinmark-set.toml`` stating what was found; likely units that differ from how the files
    are read now are written commented out, to be confirmed by the chemist."""
    tset = f.tset
    out = [f"# Set manifest written by `basinmark init` after looking at the files of {f.root.name!r};",
           "# docs/set-manifest.md describes every key.  Lines starting with # are not read.",
           f"name = {_toml_str(f.root.name)}", ""]
    out.append("# How the runs were found:")
    out += [f"#   {n}" for n in tset.notes] or ["#   no runs"]
    for lo in tset.left_out:
        out.append(f"#   left out: {Path(lo.path).name}: {lo.reason.split(': ', 1)[-1]}")
    if f.patterns:
        out += ["# The patterns below reproduce this pairing (checked); edit them to pair otherwise.", "[files]"]
        for role in ("backward", "forward", "joined"):
            if role in f.patterns:
                out.append(f"{role} = {_toml_str(f.patterns[role])}")
        out.append("folders = [" + ", ".join(_toml_str(x) for x in f.patterns["folders"]) + "]")
    else:
        out.append("# [files] patterns: none written (the runs are found by their names; see docs/set-manifest.md)")
    out += ["", "[units]"]
    for g in f.guesses:
        if g.unit is None:
            out.append(f"# {g.what}: cannot be told: {g.how}")
            out.append(f"{g.what} = {_toml_str(g.current)}   # as read now; CHECK")
        elif g.unit == g.current:
            out.append(f"{g.what} = {_toml_str(g.unit)}   # likely: {g.how}")
        else:
            out.append(f"{g.what} = {_toml_str(g.current)}   # as read now, but the files look like {g.unit}:")
            out.append(f"# {g.what} = {_toml_str(g.unit)}   # LIKELY: {g.how}; check, then use this line instead")
    out += ["", "# comment-line keys found in the files: " + (", ".join(f.file_keys) or "none"), "[keys]"]
    for role, key in f.keys_used.items():
        if key is None:
            out.append(f"# {role} = \"...\"   # no key for the {role} {'time' if role == 'time' else 'energy'} found")
        elif key.startswith("("):
            out.append(f"# {role}: {key}")
        else:
            out.append(f"{role} = {_toml_str(key)}")
    if f.keys_used.get("time") is None:
        out += ["", "[time]", "# the files carry no times; state the time between frames (fs):", "# step_fs = 1.0"]
    out += ["", "# The study's own transition-state-theory estimate, shown beside the observed ratio:",
            "# [tst]", "# major = \"product_a\"", "# minor = \"product_b\"",
            "# ddg = 0.0        # G‡(minor) − G‡(major)", "# unit = \"kcal/mol\"", "# temperature = 298.15",
            "# source = \"where the number comes from\""]
    return "\n".join(out) + "\n"


def preview_counts(f: Findings) -> Counter | None:
    """Outcomes of the set under the PROPOSED rules (not recorded anywhere), or None without a usable proposal."""
    from basinmark.core.classify import classify_set
    from basinmark.core.rules import parse_rules

    p = f.proposal
    if p is None or len(p.basins) < 2:
        return None
    rules = parse_rules(rules_text(p, f.root.name), source=PROPOSED_NAME, n_atoms=f.tset.n_atoms)
    return Counter(classify_set(f.tset, rules)["outcome"])


def report_text(f: Findings, written: list[Path] | None = None) -> str:
    tset = f.tset
    lines = [f"{f.root}: {len(tset)} runs"]
    lines += [f"  found: {n}" for n in tset.notes]
    lines += [f"  left out: {lo}" for lo in tset.left_out]
    lines += [f"  not loaded: {x}" for x in tset.failures]
    lines += [f"  warning: {w}" for w in tset.warnings]
    if not len(tset):
        return "\n".join(lines + ["Nothing to propose: no run could be read."]) + "\n"
    lines.append("")
    lines.append("Comment-line keys: " + ", ".join(f"{role} = {key or '(none)'}" for role, key in f.keys_used.items())
                 + f"   (all numeric keys: {', '.join(f.file_keys) or 'none'})")
    lines.append("Likely units:")
    for g in f.guesses:
        verdict = g.unit or "cannot tell"
        note = "" if g.unit in (None, g.current) else f"   <- read now as {g.current}: CHECK"
        lines.append(f"  {g.what}: {verdict} ({g.how}){note}")
    lines.append("Atoms (numbers as in rules files, from 1): " + ", ".join(f"{i} {s}" for i, s in f.atoms))
    lines.append(f"Bonds of the transition-state frame (run {f.ts_run}, t = 0): "
                 + ", ".join(f"{a}-{b} {d:.2f} Å" for a, b, d in f.ts_bonds))
    p = f.proposal
    lines.append("")
    if p is not None and p.monitors:
        lines.append("Proposed monitors (the distances that differ most between the ends of the runs):")
        lines += [f"  {m.name} = [{m.atoms[0]}, {m.atoms[1]}]: {m.how}" for m in p.monitors]
        lines.append("Proposed basins:")
        for b in p.basins:
            conds = ", ".join(f"{m.name} {'<' if low else '>'} {m.below if low else m.above:.2f}"
                              for k, (m, low) in enumerate(zip(p.monitors, b.pattern)) if k in b.used)
            lines.append(f"  {b.name}: {conds} ({b.how})")
    lines += [f"Note: {n}" for n in (p.notes if p else [])]
    counts = preview_counts(f)
    if counts:
        lines.append("Outcomes under these PROPOSED rules (a preview, not recorded): "
                     + ", ".join(f"{k} {v}" for k, v in counts.most_common()))
    if written:
        lines.append("")
        lines.append("Wrote " + ", ".join(str(w) for w in written) + ".")
    if p is not None and len(p.basins) >= 2:
        lines.append(f"Nothing is classified on these rules until you accept them: check and edit {PROPOSED_NAME}, "
                     f"then run `basinmark init {f.root} --accept`.")
    return "\n".join(lines) + "\n"


def write_files(f: Findings, force: bool = False) -> tuple[list[Path], list[str]]:
    """Write the manifest (unless one exists) and the proposed rules; returns (written, sentences on what was kept)."""
    written, kept = [], []
    manifest = f.root / MANIFEST_NAME
    if manifest.exists() and not force:
        kept.append(f"{manifest} exists and was kept (--force writes over it)")
    elif len(f.tset):
        _write(manifest, manifest_text(f))
        if not _same_pairing(f):  # the written patterns must find exactly the runs found before
            f.patterns = None
            _write(manifest, manifest_text(f))
        written.append(manifest)
    p = f.proposal
    if p is not None and len(p.basins) >= 2:
        proposed = f.root / PROPOSED_NAME
        if proposed.exists() and not force:
            kept.append(f"{proposed} exists and was kept (--force writes over it)")
        else:
            _write(proposed, rules_text(p, f.root.name))
            written.append(proposed)
    return written, kept


def _same_pairing(f: Findings) -> bool:
    from basinmark.core.sets import discover

    try:
        plan = discover(f.root)
    except SetError:
        return False
    now = {s.run_id: [p.resolve() for p in s.files] for s in plan.runs if s.run_id in f.tset.runs}
    before = {rid: [s.path for s in t.sources] for rid, t in f.tset.runs.items()}
    return now == before


def _write(path: Path, text: str) -> None:
    tmp = path.with_name(f".{path.name}.tmp")
    tmp.write_text(text, encoding="utf-8")
    os.replace(tmp, path)


def accept_proposal(root: str | Path, force: bool = False, who: str | None = None) -> Path:
    """Make ``basins.proposed.toml`` the set's ``basins.toml``, after checking it as a rules file."""
    from basinmark.core.rules import parse_rules
    from basinmark.core.sets import discover

    root = Path(root)
    proposed, rules = root / PROPOSED_NAME, root / RULES_NAME
    if not proposed.is_file():
        raise SetError(f"{proposed}: no proposed rules to accept (run `basinmark init {root}` first)")
    if rules.exists() and not force:
        raise SetError(f"{rules} exists; it is kept (use --force to replace it with {PROPOSED_NAME})")
    text = proposed.read_text(encoding="utf-8")
    n_atoms = None
    plan = discover(root)
    if plan.runs:
        from basinmark.core.sets import open_set

        n_atoms = open_set(root).n_atoms
    parse_rules(text, source=str(proposed), n_atoms=n_atoms)  # raises with file, line and key
    who = who or getpass.getuser()
    stamp = datetime.now(timezone.utc).strftime("%Y-%m-%d %H:%M UTC")
    if text.startswith(_PROPOSED_MARK):
        text = text.replace(_PROPOSED_MARK, f"# Rules accepted by {who} on {stamp}; first proposed by `basinmark init`", 1)
    _write(rules, text)
    proposed.unlink()
    return rules
