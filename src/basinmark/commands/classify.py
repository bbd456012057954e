"""``basinmark classify SET`` and ``basinmark sweep SET``: automatic labels by the rules file, and how
the counts and the product ratio move with one threshold."""

from __future__ import annotations

import json
import sys
from pathlib import Path

from basinmark.commands._bounds import MAX_SWEEP_STEPS, number, whole

#: local Dask workers one command may start (our own limit, well past a workstation's cores)
MAX_CLUSTER_WORKERS = 256
from basinmark.commands._output import FORMATS, emit, progress_printer, table_text
from basinmark.core.errors import SetError


def register(sub) -> None:
    p = sub.add_parser(
        "classify", help="classify every run by the rules file and record the automatic labels",
        description="Open a set, classify each run by the set's rules file (basins.toml), write the outcomes "
                    "as automatic labels into the label journal (unless --dry-run), and print the counts per "
                    "outcome and the runs flagged for a person's look.")
    _common(p)
    p.add_argument("--dry-run", action="store_true", help="classify and print, but write nothing")
    p.add_argument("--journal", metavar="FILE", help="write into this label journal instead of the set's own")
    p.add_argument("--all-runs", action="store_true", help="print one row per run instead of counts and flagged runs")
    p.add_argument("--format", choices=FORMATS, default="table",
                   help="table (default); json: counts, flagged runs and notes; csv: one row per run")
    where = p.add_argument_group(
        "on a Dask cluster", "read and classify the runs as tasks on Dask workers (needs the optional extra: "
        "pip install 'basinmark[cluster]'); the set must be on a file system the workers share, at the same path; "
        "the journal is still written here, once; no cache is used (docs/cluster.md)")
    engine = where.add_mutually_exclusive_group()
    engine.add_argument("--scheduler", metavar="ADDRESS",
                        help="a running Dask scheduler: its address (such as tcp://node17:8786) or the scheduler file it "
                             "wrote")
    engine.add_argument("--workers", type=whole(1, MAX_CLUSTER_WORKERS), metavar="N",
                        help=f"start a local Dask cluster of N worker processes (1 to {MAX_CLUSTER_WORKERS})")
    where.add_argument("--connect-timeout", type=number(0, 3600, above=True), default=10.0, metavar="SECONDS",
                       help="give up on a scheduler that does not answer within this time (default 10)")
    where.add_argument("--worker-wait", type=number(0, 86400, above=True), default=120.0, metavar="SECONDS",
                       help="give up when no worker has joined the scheduler within this time (default 120)")
    p.set_defaults(func=run_classify)

    s = sub.add_parser(
        "sweep", help="outcome counts and the product ratio as one threshold changes",
        description="Classify the set again for evenly spaced values of one bound of one basin's condition "
                    "(the monitors are computed once) and print the counts and the ratio A/B with its interval.")
    _common(s)
    s.add_argument("--basin", required=True, metavar="NAME", help="the basin whose condition changes")
    s.add_argument("--monitor", required=True, metavar="NAME", help="the monitor of that condition")
    s.add_argument("--bound", required=True, choices=("below", "above"),
                   help="which bound moves (on a 'between' condition: below = its upper end, above = its lower end)")
    s.add_argument("--from", dest="start", required=True, type=number(), metavar="A", help="first value")
    s.add_argument("--to", dest="stop", required=True, type=number(), metavar="B", help="last value")
    s.add_argument("--steps", type=whole(1, MAX_SWEEP_STEPS), default=11, metavar="N",
                   help=f"number of values, 1 to {MAX_SWEEP_STEPS} (default 11)")
    s.add_argument("--ratio", nargs=2, metavar=("A", "B"), help="the two outcomes compared (default: the first two "
                   "products)")
    s.add_argument("--confidence", type=float, default=0.95, help="confidence level of the ratio interval")
    s.add_argument("--format", choices=FORMATS, default="table", help="output format (default: table)")
    s.set_defaults(func=run_sweep)


def _common(p) -> None:
    p.add_argument("set", metavar="SET", help="the set folder")
    p.add_argument("--rules", metavar="FILE", help="rules file (default: SET/basins.toml)")
    p.add_argument("--no-cache", action="store_true", help="ignore and do not write the parsed-array cache")
    p.add_argument("--quiet", "-q", action="store_true", help="no progress line on stderr")


def _folder_and_rules(args):
    """The set folder and its rules, or a clear error (syntax and schema first, before the slower loading)."""
    from basinmark.core.rules import load_rules
    from basinmark.core.sets import rules_path

    root = Path(args.set)
    if not root.is_dir():
        raise SetError(f"{root}: not a folder (a set is a folder of runs)")
    rfile = Path(args.rules) if args.rules else rules_path(root)
    if not rfile.is_file():
        raise SetError(f"{rfile}: no rules file; write one (see docs/rules-file.md) or pass --rules FILE")
    return root, load_rules(rfile)


def _load(args):
    """The set and its rules, or a clear error."""
    from basinmark.core.sets import open_set

    root, rules = _folder_and_rules(args)
    tset = open_set(root, progress=progress_printer(args.quiet, "loading"), use_cache=not args.no_cache)
    return root, tset, rules, _checked(root, tset, rules)


def _checked(root: Path, tset, rules) -> list[str]:
    """The notes on a loaded set, or a clear error when nothing loaded or the rules name atoms the runs lack."""
    if len(tset) == 0:
        reasons = [str(f) for f in tset.failures[:3]] + tset.warnings[:2]
        raise SetError(f"{root}: no run could be loaded" + (": " + "; ".join(reasons) if reasons else ""))
    rules.check_atoms(min(t.n_atoms for t in tset))
    notes = list(rules.warnings) + list(tset.warnings)
    if tset.failures:
        notes.append(f"{len(tset.failures)} file(s) of the set failed to load and are not classified; "
                     f"`basinmark info SET` lists them")
    return notes


def _classified(args):
    """The set, its rules, the notes so far and the classification table: here, or on a Dask cluster."""
    from basinmark.core.classify import classify_set

    if not (args.scheduler or args.workers):
        root, tset, rules, notes = _load(args)
        return root, tset, rules, notes, classify_set(tset, rules, progress=progress_printer(args.quiet,
                                                                                            "classifying"))
    from basinmark.core.dask_classify import classify_on_cluster
    from basinmark.core.run_task import assemble_table

    root, rules = _folder_and_rules(args)
    engine = f"on {args.scheduler}" if args.scheduler else f"on {args.workers} local Dask workers"
    tset, parts = classify_on_cluster(root, rules, address=args.scheduler, workers=args.workers,
                                      connect_timeout=args.connect_timeout, worker_wait=args.worker_wait,
                                      progress=progress_printer(args.quiet, f"classifying {engine}"))
    notes = _checked(root, tset, rules)
    return root, tset, rules, notes, assemble_table(tset, parts, rules)


def _data_changed(jpath: Path, tset) -> set[str]:
    """Runs whose labels in the journal were set on different data than the files hold now."""
    from basinmark.core.journal import LabelJournal

    if not jpath.is_file():
        return set()
    with LabelJournal.open(jpath, readonly=True) as j:
        state = j.state(current_hashes=dict(tset.content_hashes()))
    if state.empty:
        return set()
    return set(state.loc[state["data_changed"].fillna(False).astype(bool), "run"])


def run_classify(args) -> int:
    from basinmark.core import stats
    from basinmark.core.classify import add_flag, outcome_counts, write_automatic_labels
    from basinmark.core.journal import LabelJournal
    from basinmark.core.labels import all_labels
    from basinmark.core.sets import journal_path

    root, tset, rules, notes, table = _classified(args)
    notes += table.attrs.get("notes", [])
    jpath = Path(args.journal) if args.journal else journal_path(root)
    changed = _data_changed(jpath, tset)
    if changed:
        table = add_flag(table, changed, "data_changed")
        notes.append(f"{len(changed)} run(s) changed on disk since they were labeled (flag data_changed); "
                     f"their earlier labels describe other data")
    written = 0
    if not args.dry_run:
        with LabelJournal.open(jpath, set_id=tset.name, allowed=all_labels(rules)) as j:
            written = write_automatic_labels(j, table, rules)
            notes += [f"journal: {w}" for w in j.warnings]
    counts = outcome_counts(table, rules)
    n = len(table)
    counts["fraction"] = counts["count"] / n if n else float("nan")
    warnings = stats.reliability_warnings(dict(zip(counts["outcome"], counts["count"])), rules.products)
    # commit times named by the end they belong to (|t| from the TS, final entry: docs/commit-times.md)
    flagged = table.loc[table["flags"] != "", ["run", "outcome", "flags", "product_end", "product_final_entry_fs",
                                               "reactant_final_entry_fs"]]
    gap_line = _gap_sentence(table, rules, warnings)
    commit_line, commit_doc = _commit_sentence(table, rules)
    if args.dry_run:
        done = f"dry run: nothing written ({n} runs classified with {rules.source}, sha256 {rules.sha256[:12]})"
    else:
        unchanged = n - written
        same = f"; {unchanged} unchanged since the last classification, not written again" if unchanged else ""
        done = (f"{written} automatic labels written to {jpath} (rules {rules.source}, sha256 {rules.sha256[:12]})"
                f"{same}; hand labels are kept and still take precedence")

    out = sys.stdout
    if args.format == "json":
        doc = {"runs": n, "counts": json.loads(counts.to_json(orient="records")),
               "flagged": json.loads(flagged.to_json(orient="records")), "written": written,
               "time_gap": gap_line, "commit_times": commit_doc,
               "dry_run": bool(args.dry_run), "rules": str(rules.source),
               "rules_sha256": rules.sha256,
               "warnings": warnings, "notes": notes}
        json.dump(doc, out, indent=2)
        out.write("\n")
    elif args.format == "csv" or args.all_runs:
        emit(table, args.format)
    else:
        out.write(f"{tset.name}: {n} runs\n\n")
        out.write(table_text(counts) + "\n")
        if len(flagged):
            out.write(f"\n{len(flagged)} flagged run(s):\n" + table_text(flagged, floatfmt=".1f") + "\n")
        else:
            out.write("\nno flagged runs\n")
        if commit_line:
            out.write(f"\n{commit_line}\n")
        if gap_line:
            out.write(f"\n{gap_line}\n")
    stream = sys.stderr if args.format in ("csv", "json") else out
    if args.format != "json":
        for line in warnings:
            print(f"warning: {line}", file=stream)
        for line in notes:
            print(f"note: {line}", file=stream)
    print(done, file=sys.stderr if args.format in ("csv", "json") else out)
    return 0


def _commit_sentence(table, rules) -> tuple[str, dict]:
    """Product-side commit times of the reactive runs per product, saying which definition they are."""
    from basinmark.core.timing import COMMIT_DEFINITIONS, DEFAULT_COMMIT_COLUMN, commit_time_summary

    reactive = table[table["outcome"].isin(rules.products)]
    final = commit_time_summary(reactive)
    first = commit_time_summary(reactive, column="product_first_arrival_fs").set_index("outcome")
    rows = [r for r in final.to_dict("records") if r["n"] > 0]
    definition = COMMIT_DEFINITIONS[DEFAULT_COMMIT_COLUMN]
    doc = {"definition": definition, "column": DEFAULT_COMMIT_COLUMN, "rows": rows,
           "first_arrival_rows": [r for r in first.reset_index().to_dict("records") if r["n"] > 0]}
    if not rows:
        return "", doc
    parts = ", ".join(f"{r['outcome']} median {r['median_fs']:.1f} fs ({r['n']} run{'s' if r['n'] != 1 else ''})"
                      for r in rows)
    arrival = ", ".join(f"{o} median {first.loc[o, 'median_fs']:.1f} fs" for o in (r["outcome"] for r in rows)
                        if o in first.index and first.loc[o, "n"] > 0)
    return (f"commit times ({definition}, |t| from the TS, whichever end holds the product): {parts}; "
            f"first arrival: {arrival} (docs/commit-times.md)"), doc


def _gap_sentence(table, rules, warnings: list[str]) -> str:
    """One sentence on the concerted fraction when the rules name two bonds (adds its warnings)."""
    from basinmark.core.timing import concerted_fraction

    g = rules.time_gap
    if g is None:
        return ""
    res = concerted_fraction(table, concerted_fs=g.concerted_fs, outcomes=rules.products)
    warnings += res["warnings"]
    if res["n_formed"] == 0:
        return f"time gap {g.bonds[0]}/{g.bonds[1]}: no reactive run formed both bonds"
    return (f"time gap {g.bonds[0]}/{g.bonds[1]}: {res['concerted']} of {res['n_formed']} reactive runs that formed "
            f"both bonds are dynamically concerted (gap < {g.concerted_fs:g} fs): {res['fraction_concerted']:.0%} "
            f"(95% interval {res['lo']:.0%} to {res['hi']:.0%}); {res['stepwise']} stepwise")


def run_sweep(args) -> int:
    from basinmark.core.sweep import sweep_threshold, sweep_values

    if args.steps < 1:
        raise SetError("--steps must be at least 1")
    _, tset, rules, notes = _load(args)
    a, b = args.ratio if args.ratio else (None, None)
    values = sweep_values(args.start, args.stop, args.steps)
    df = sweep_threshold(tset, rules, args.basin, args.monitor, args.bound, values, a=a, b=b,
                         confidence=args.confidence)
    emit(df, args.format)
    stream = sys.stderr if args.format in ("csv", "json") else sys.stdout
    head = (f"{args.basin}.{args.monitor} {args.bound} from {args.start:g} to {args.stop:g} in {args.steps} steps, "
            f"{len(tset)} runs; ratio {df.attrs['a']}/{df.attrs['b']} with {args.confidence:.0%} interval")
    print(head, file=stream)
    for line in notes:
        print(f"note: {line}", file=stream)
    return 0
