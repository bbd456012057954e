"""The work of each run — read its files, measure the rules' monitors, classify — as a pure function of
(files, manifest, rules), so that it can run anywhere: in this process or as a task on another machine.

:func:`classify_runs` reads nothing but the given runs' own files, writes nothing (no cache, no journal) and
returns plain, picklable data (:class:`BatchResult`): each run's table row, or why it failed to load, and an
:class:`RunOutline` — everything the set-level decisions need (which atoms, how many frames, which files and
content hashes, the problems met) without the coordinates.  A batch of runs is classified in one vectorised
pass, but each run's row depends on that run alone (the classification is per run:
:mod:`basinmark.core.classify`), so any split of a set into batches gives the same rows as the whole set at
once; tests/test_run_task.py checks that.

It calls the set reader and the classifier as they are; it changes neither.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from types import SimpleNamespace

import numpy as np
import pandas as pd

from basinmark.core.classify import (TABLE_COLUMNS, Prepared, classification_notes, classify_prepared, prepare,
                                     results_table)
from basinmark.core.errors import BasinmarkError
from basinmark.core.manifest import SetLayout
from basinmark.core.model import LoadFailure, SourceFile, Trajectory, TrajectorySet
from basinmark.core.pairing import RunSpec
from basinmark.core.rules import Rules, RulesError


@dataclass
class RunOutline:
    """A loaded run without its coordinates: what the client needs to sort the set's runs and to check labels."""

    run_id: str
    numbers: np.ndarray  # (n_atoms,) atomic numbers
    n_frames: int
    energy_keys: tuple[str, ...]
    sources: tuple[SourceFile, ...]
    problems: list[str]
    metadata: dict
    reading: str

    @classmethod
    def of(cls, traj: Trajectory) -> "RunOutline":
        return cls(traj.run_id, np.asarray(traj.numbers), traj.n_frames, tuple(sorted(traj.energies)),
                   tuple(traj.sources), list(traj.problems), dict(traj.metadata), traj.reading)

    def trajectory(self) -> Trajectory:
        """A :class:`Trajectory` standing for the run on the client: atoms, sources, problems and content hash
        as read, but no coordinates — its positions, times and energies are views of a single NaN (no memory),
        so that nothing can mistake them for data."""
        times = np.broadcast_to(np.float64(np.nan), (self.n_frames,))
        positions = np.broadcast_to(np.float32(np.nan), (self.n_frames, self.numbers.size, 3))
        # every key the run had, "total" included, so that no total is computed from the placeholders
        energies = {k: times for k in self.energy_keys}
        return Trajectory(self.run_id, self.numbers, positions, times, energies, sources=self.sources,
                          metadata=dict(self.metadata), problems=list(self.problems), reading=self.reading)


@dataclass
class BatchResult:
    """What :func:`classify_runs` gives back for its runs, in the order given."""

    outlines: list[RunOutline] = field(default_factory=list)  # the runs that loaded
    failures: list[tuple[str, LoadFailure]] = field(default_factory=list)  # (run id, why) of the runs that did not
    #: runs that loaded but cannot be classified by these rules (too few atoms for a monitor), with the rules'
    #: own sentence; whether that stops the classification is for the client to say, once it knows whether
    #: the run belongs to the set at all (runs of other atoms are left out)
    unclassified: dict[str, str] = field(default_factory=dict)
    table: pd.DataFrame = field(default_factory=lambda: pd.DataFrame(columns=TABLE_COLUMNS))
    drift_ev: dict[str, float] = field(default_factory=dict)  # run id -> total-energy drift (NaN: no energies)
    #: run id -> (times, monitor series) when the rules allow overlapping basins (their notes need every frame)
    frames: dict[str, tuple[np.ndarray, dict[str, np.ndarray]]] = field(default_factory=dict)


def read_run(spec: RunSpec, layout: SetLayout) -> Trajectory | LoadFailure:
    """One run read and joined exactly as :func:`basinmark.core.sets.open_set` reads it without a cache, or
    the :class:`LoadFailure` (file and line) that the set would list for it."""
    from basinmark.core import sets

    try:
        return sets._join(spec, layout)
    except Exception as exc:  # collected, never fatal for the set (as open_set does)
        return sets._failure(spec, exc)


def classify_runs(specs: list[RunSpec], layout: SetLayout, rules: Rules) -> BatchResult:
    """Read, measure and classify the runs ``specs`` (a pure function of their files, the manifest and the rules)."""
    out = BatchResult()
    trajs = []
    for spec in specs:
        got = read_run(spec, layout)
        if isinstance(got, LoadFailure):
            out.failures.append((spec.run_id, got))
            continue
        out.outlines.append(RunOutline.of(got))
        try:
            rules.check_atoms(got.n_atoms)
        except RulesError as exc:
            out.unclassified[spec.run_id] = str(exc)
            continue
        trajs.append(got)
    if not trajs:
        return out
    prep = prepare(trajs, rules)
    out.table = results_table(prep, classify_prepared(prep, rules), rules)
    out.table.attrs.clear()  # the notes are the whole set's, made by the client from all runs
    out.drift_ev = dict(zip(prep.run_ids, prep.drift_ev.tolist()))
    if rules.allow_overlap:
        for r, rid in enumerate(prep.run_ids):
            cut = prep.run_slice(r)
            out.frames[rid] = (prep.times[cut].copy(), {k: v[cut].copy() for k, v in prep.monitors.items()})
    return out


def notes_input(run_ids: list[str], drift_ev: dict[str, float],
                frames: dict[str, tuple[np.ndarray, dict[str, np.ndarray]]], rules: Rules) -> Prepared:
    """The :class:`Prepared` that :func:`basinmark.core.classify.classification_notes` reads, rebuilt for the
    runs ``run_ids`` (in that order) from the parts that batches brought back."""
    drift = np.array([drift_ev[r] for r in run_ids], dtype=np.float64)
    if rules.allow_overlap and run_ids:
        lengths = np.array([frames[r][0].size for r in run_ids], dtype=np.intp)
        times = np.concatenate([frames[r][0] for r in run_ids])
        keys = list(frames[run_ids[0]][1])
        monitors = {k: np.concatenate([frames[r][1][k] for r in run_ids]) for k in keys}
    else:
        lengths = np.zeros(len(run_ids), dtype=np.intp)
        times, monitors = np.zeros(0), {}
    ends = np.cumsum(lengths)
    starts = ends - lengths
    return Prepared(run_ids=list(run_ids), content_hashes=[""] * len(run_ids), starts=starts, ends=ends,
                    ts=starts.copy(), times=times, monitors=monitors, drift_ev=drift)


def assemble(plan, parts: list[BatchResult]) -> TrajectorySet:
    """The set as :func:`basinmark.core.sets.open_set` would give it, from the batches' results (in any order):
    runs in the plan's order (as outlines, without coordinates), failures in the plan's order after those found
    while pairing, and the same runs left out and warnings as a local open."""
    from basinmark.core.sets import _finish

    order = {spec.run_id: i for i, spec in enumerate(plan.runs)}
    outlines = sorted((o for part in parts for o in part.outlines), key=lambda o: order[o.run_id])
    failed = sorted((f for part in parts for f in part.failures), key=lambda f: order[f[0]])
    runs = {o.run_id: o.trajectory() for o in outlines}
    return _finish(plan, runs, list(plan.failures) + [f for _, f in failed])


def assemble_table(tset: TrajectorySet, parts: list[BatchResult], rules: Rules) -> pd.DataFrame:
    """The table :func:`basinmark.core.classify.classify_set` gives for ``tset``, from the batches' rows: one row
    per run of the set in its order, with the same notes.  The set's atoms must have been checked against the
    rules first (as ``basinmark classify`` does), since a run the rules cannot measure has no row."""
    cannot = [(rid, why) for part in parts for rid, why in part.unclassified.items() if rid in tset.runs]
    if cannot:
        raise RulesError(rules.source, f"run {cannot[0][0]}: {cannot[0][1]}")
    tables = [part.table for part in parts if len(part.table)]
    if not tables:
        raise BasinmarkError("no run of the set was classified")
    rows = pd.concat(tables, ignore_index=True)
    where = dict(zip(rows["run"], range(len(rows))))
    rows = rows.iloc[[where[rid] for rid in tset.runs]]
    # built again from plain lists, as results_table builds it: a column's type follows its values (text with
    # gaps, or no text at all), which batches of a few runs each would otherwise decide for themselves
    table = pd.DataFrame({c: rows[c].tolist() for c in TABLE_COLUMNS}, columns=TABLE_COLUMNS)
    drift = {k: v for part in parts for k, v in part.drift_ev.items()}
    frames = {k: v for part in parts for k, v in part.frames.items()}
    prep = notes_input(list(tset.runs), drift, frames, rules)
    table.attrs["rules_sha256"] = rules.sha256
    # the overlap notes read only the outcomes of the classification
    table.attrs["notes"] = classification_notes(prep, rules, SimpleNamespace(outcome=list(table["outcome"])))
    return table
