"""Label commands: label, undo, history, verify, compare, export-labels, import-labels, unlock, recover,
receipt.

All of them work on a set's label journal (``<set>/basinmark-labels.jsonl``, or ``--journal``).
Allowed labels are the products of the set's rules file plus the fixed labels.
"""

from __future__ import annotations

import math
import sys
from pathlib import Path

import pandas as pd

from basinmark.commands._output import add_format_option, emit, table_text
from basinmark.core.errors import BasinmarkError
from basinmark.core.text import printable


def _common(p, *, journal: bool = True, labeler: bool = False, load: bool = False) -> None:
    if journal:
        p.add_argument("--journal", metavar="FILE", help="use this label journal instead of the set's own")
    if labeler:
        p.add_argument("--as", dest="labeler", metavar="NAME", help="labeler name (default: your login name)")
    if load:
        p.add_argument("--no-cache", action="store_true", help="ignore and do not write the parsed-array cache")


def register(sub) -> None:
    p = sub.add_parser("label", help="set the label of one run (saved to the journal at once)",
                       description="Record a hand label for one run of a set in its label journal.")
    p.add_argument("set", metavar="SET", help="the set folder")
    p.add_argument("run", metavar="RUN", help="run id")
    p.add_argument("label", metavar="LABEL", help="a product of the rules file, or recrossing, unfinished, "
                   "ambiguous, excluded (excluded needs --reason)")
    p.add_argument("--reason", default="", help="why (free text; required for 'excluded')")
    _common(p, labeler=True, load=True)
    add_format_option(p)
    p.set_defaults(func=cmd_label)

    p = sub.add_parser("note", help="write a note on one run (kept beside its labels, never changing them)",
                       description="Record free text as the run's note in the label journal; an empty text "
                                   "clears the note. `history` lists every note with the labels.")
    p.add_argument("set", metavar="SET", help="the set folder")
    p.add_argument("run", metavar="RUN", help="run id")
    p.add_argument("text", metavar="TEXT", help="the note (one line of plain text; \"\" clears it)")
    _common(p, labeler=True, load=True)
    add_format_option(p)
    p.set_defaults(func=cmd_note)

    p = sub.add_parser("undo", help="take back the latest label of one run (recorded as a new event)",
                       description="Add an undo event that restores the run's previous label.")
    p.add_argument("set", metavar="SET")
    p.add_argument("run", metavar="RUN")
    p.add_argument("--reason", default="", help="why (free text)")
    _common(p, labeler=True)
    add_format_option(p)
    p.set_defaults(func=cmd_undo)

    p = sub.add_parser("history", help="every label event and note of one run",
                       description="Print the label, undo and note events of one run, oldest first (a note's "
                                   "text is in the reason column).")
    p.add_argument("set", metavar="SET")
    p.add_argument("run", metavar="RUN")
    _common(p)
    add_format_option(p)
    p.set_defaults(func=cmd_history)

    p = sub.add_parser("verify", help="check the label journal: hash chain, sequence, and the runs' data",
                       description="Check the journal's header, hash chain, sequence numbers and head file, and "
                                   "every labeled run's content hash against the files on disk. Exits 1 if "
                                   "anything is wrong.")
    p.add_argument("set", metavar="SET")
    p.add_argument("--no-data", action="store_true", help="check only the journal, not the run files")
    p.add_argument("--expect", metavar="RECEIPT", help="also check the journal against a receipt printed earlier "
                   "by 'basinmark receipt' (the whole line, quoted)")
    _common(p, load=True)
    add_format_option(p)
    p.set_defaults(func=cmd_verify)

    p = sub.add_parser("recover", help="set aside what a damaged journal cannot vouch for, and record why",
                       description="When a label journal fails its check (a changed, missing, repeated or "
                                   "inserted event, a cut end, a missing or wrong head file, an unfinished batch), "
                                   "nothing more is written to it until this is run.  Every line from the first "
                                   "untrusted one on is moved to a side file beside the journal (nothing is "
                                   "deleted), and a 'recovered' event records the problems, what was set aside, "
                                   "who and why.  Labels set aside can be labeled again or imported.")
    p.add_argument("set", metavar="SET")
    p.add_argument("--reason", default="", help="why (free text; recorded in the journal)")
    _common(p, labeler=True)
    p.set_defaults(func=cmd_recover)

    p = sub.add_parser("receipt", help="print a one-line receipt of the journal's current end (for a notebook)",
                       description="Print one line naming the journal, its number of events, the last event's "
                                   "hash and the time.  Keep it somewhere else (a lab notebook); later, "
                                   "'basinmark verify SET --expect \"RECEIPT\"' shows whether the journal still "
                                   "holds that event unchanged.")
    p.add_argument("set", metavar="SET")
    _common(p)
    p.set_defaults(func=cmd_receipt)

    p = sub.add_parser("compare", help="agreement between two labelers: matrix, kappa, disagreements",
                       description="Compare two labelers: two journals (files or set folders), or one set's "
                                   "journal with --labelers A B (auto, current, hand, final, or labeler names).")
    p.add_argument("a", metavar="A", help="a journal file or a set folder")
    p.add_argument("b", metavar="B", nargs="?", help="a second journal file or set folder")
    p.add_argument("--labelers", nargs=2, metavar=("X", "Y"),
                   help="compare two labelers of A's journal: auto (recorded), current (classified now with "
                        "the set's rules, nothing recorded), hand, final or labeler names")
    p.add_argument("--use", choices=("final", "auto", "hand"), default="final",
                   help="with two journals, which label of each run to compare (default: final)")
    p.add_argument("--confidence", type=float, default=0.95, help="confidence level of the kappa interval")
    p.add_argument("-o", "--output", metavar="FILE", help="also write the review as a Markdown report")
    p.add_argument("--format", choices=("table", "json"), default="table", help="output format (default: table)")
    p.set_defaults(func=cmd_compare)

    p = sub.add_parser("export-labels", help="write the current labels as CSV (or Parquet)",
                       description="Write one row per labeled run: automatic, hand and final label, who, when, "
                                   "why, and whether the run's data changed since.")
    p.add_argument("set", metavar="SET")
    p.add_argument("-o", "--output", metavar="FILE", help=".csv or .parquet (default: print to the terminal)")
    p.add_argument("--no-data", action="store_true", help="do not load the runs (data_changed stays empty)")
    _common(p, load=True)
    add_format_option(p)
    p.set_defaults(func=cmd_export)

    p = sub.add_parser("import-labels", help="import labels from a CSV (all or nothing)",
                       description="Import hand labels from a CSV with columns run, label and optionally "
                                   "labeler, reason. Nothing is imported if any row is wrong.")
    p.add_argument("set", metavar="SET")
    p.add_argument("file", metavar="FILE", help="the CSV file")
    _common(p, labeler=True, load=True)
    p.set_defaults(func=cmd_import)

    p = sub.add_parser("unlock", help="break a stale journal lock left by a program that stopped",
                       description="Remove the journal's lock when the program holding it is gone, and record "
                                   "that in the journal.")
    p.add_argument("set", metavar="SET")
    p.add_argument("--force", action="store_true",
                   help="break it even if its program may still run (another host, or a live pid)")
    p.add_argument("--reason", default="", help="why (free text)")
    _common(p, labeler=True)
    p.set_defaults(func=cmd_unlock)


# --- helpers ------------------------------------------------------------------------------------
def _root(args) -> Path:
    root = Path(args.set).expanduser()
    if not root.is_dir():
        raise BasinmarkError(f"{root}: no such set folder")
    return root


def _journal(args) -> Path:
    from basinmark.core.sets import journal_path

    return Path(args.journal).expanduser() if getattr(args, "journal", None) else journal_path(_root(args))


def _existing_journal(args) -> Path:
    path = _journal(args)
    if not path.is_file():
        raise BasinmarkError(f"there is no label journal at {path} (nothing has been labeled yet)")
    return path


def _allowed(root: Path) -> list[str]:
    from basinmark.core.labels import all_labels
    from basinmark.core.rules import load_rules
    from basinmark.core.sets import rules_path

    path = rules_path(root)
    if not path.is_file():
        raise BasinmarkError(f"{path}: the set has no rules file, so the allowed labels are unknown")
    return all_labels(load_rules(path))


def _hashes(args) -> tuple[dict[str, str], list[str]]:
    from basinmark.core.sets import open_set

    tset = open_set(_root(args), use_cache=not getattr(args, "no_cache", False))
    args.set_name = tset.name
    notes = [f"not loaded: {f}" for f in tset.failures] + list(tset.warnings)
    return dict(tset.content_hashes()), notes


def _run_hash(args, run_id: str) -> str:
    """The content hash of one run, loading only that run (a big set need not be read for one label)."""
    from dataclasses import replace

    from basinmark.core.model import LoadFailure
    from basinmark.core.sets import discover, iter_runs

    plan = discover(_root(args))
    args.set_name = plan.layout.name or plan.root.name
    specs = [s for s in plan.runs if s.run_id == run_id]
    if not specs:
        known = ", ".join(s.run_id for s in plan.runs[:10])
        raise BasinmarkError(f"no run {run_id!r} in the set {plan.root} (runs include: {known or 'none'})")
    for _spec, result in iter_runs(replace(plan, runs=specs), use_cache=not args.no_cache, workers=1):
        if isinstance(result, LoadFailure):
            raise BasinmarkError(f"run {run_id} could not be loaded, so it cannot be labeled: {result}")
        return result.content_hash
    raise BasinmarkError(f"run {run_id} could not be loaded")


def _open_writer(args, path: Path, allowed: list[str] | None = None):
    from basinmark.core.journal import LabelJournal

    # the set's name is known only when the set was loaded; without it the journal keeps its own
    return LabelJournal.open(path, set_id=getattr(args, "set_name", ""), labeler=getattr(args, "labeler", None),
                             allowed=allowed)


def _warn(lines) -> None:
    for w in lines:
        print(f"warning: {w}", file=sys.stderr)


def _plain(df: pd.DataFrame) -> pd.DataFrame:
    """Missing values as empty cells for the text table (pandas' <NA> reads badly)."""
    out = df.copy()
    for col in out.columns:
        if out[col].isna().any():
            out[col] = out[col].astype(object).where(out[col].notna(), None)
    return out


def _event_row(ev: dict) -> pd.DataFrame:
    return pd.DataFrame([{"run": ev.get("run"), "label": ev.get("label"), "replaces": ev.get("replaces"),
                          "labeler": ev.get("labeler"), "event": ev.get("seq"), "time": ev.get("time"),
                          "reason": ev.get("reason", "")}])


# --- commands -----------------------------------------------------------------------------------
def _check_text(args) -> None:
    """Reason and labeler name as typed: one line of plain text, no automatic source's name (before any work)."""
    from basinmark.core.labels import check_labeler_name, check_reason

    check_reason(getattr(args, "reason", ""))
    if getattr(args, "labeler", None):
        check_labeler_name(args.labeler)


def cmd_label(args) -> int:
    from basinmark.core.labels import validate_label

    _check_text(args)
    allowed = _allowed(_root(args))
    validate_label(args.label, allowed, reason=args.reason)  # before reading any run
    content_hash = _run_hash(args, args.run)
    with _open_writer(args, _journal(args), allowed) as j:
        _warn(j.warnings)
        seen = len(j.warnings)
        ev = j.record(args.run, args.label, content_hash=content_hash, reason=args.reason)
        _warn(j.warnings[seen:])  # e.g. the head file could not be updated after the label was saved
    emit(_event_row(ev), args.format)
    return 0


def cmd_note(args) -> int:
    from basinmark.core.labels import check_reason

    _check_text(args)
    check_reason(args.text, "note")  # before reading any run
    _run_hash(args, args.run)        # the run must be one of the set's (its id typed right)
    with _open_writer(args, _journal(args)) as j:
        _warn(j.warnings)
        ev = j.note(args.run, args.text)
    emit(pd.DataFrame([{"run": ev["run"], "note": ev["note"], "labeler": ev["labeler"], "event": ev["seq"],
                        "time": ev["time"]}]), args.format)
    return 0


def cmd_undo(args) -> int:
    _check_text(args)
    with _open_writer(args, _existing_journal(args)) as j:
        _warn(j.warnings)
        seen = len(j.warnings)
        ev = j.undo(args.run, reason=args.reason)
        _warn(j.warnings[seen:])
    emit(_event_row(ev), args.format)
    if args.format == "table":
        now = ev.get("label") or "no label in the journal (the automatic outcome applies once classified)"
        print(f"\nrun {args.run}: {ev.get('replaces')} taken back, now {now}")
    return 0


def cmd_history(args) -> int:
    from basinmark.core.journal import LabelJournal

    with LabelJournal.open(_existing_journal(args), readonly=True) as j:
        _warn(j.warnings)
        hist = j.history(args.run)
    if hist.empty:
        print(f"basinmark: error: run {args.run} has no label events or notes in {_journal(args)} "
              "(is the run id right? `basinmark info SET` lists them)", file=sys.stderr)
        return 2
    emit(_plain(hist.drop(columns=["content_hash"])) if args.format == "table" else hist, args.format)
    return 0


def cmd_verify(args) -> int:
    from basinmark.core.journal_verify import verify_report
    from basinmark.core.journal_witness import parse_receipt, receipt

    path = _existing_journal(args)
    expect = parse_receipt(args.expect) if args.expect else None
    hashes, notes = (None, []) if args.no_data else _hashes(args)
    problems, crash_notes, res = verify_report(path, hashes, expect=expect)
    table = pd.DataFrame([{"line": p.line, "event": p.event, "problem": p.what, "message": p.message}
                          for p in problems], columns=["line", "event", "problem", "message"])
    table["line"] = table["line"].astype("Int64")
    table["event"] = table["event"].astype("Int64")
    if args.format != "table":
        emit(_plain(table), args.format)
        return 1 if problems else 0
    if problems:
        print(table_text(_plain(table), max_width=200))
    _warn(notes)
    for n in crash_notes:
        print(f"note: {n}", file=sys.stderr)
    n = res.n_lines if res is not None else 0
    checked = "the journal only" if args.no_data else f"and {len(hashes)} runs' data"
    if expect is not None:
        checked += f", against the receipt of {expect['time']}"
    elif res is not None and res.witness is not None:
        checked += f", against this account's witness of {res.witness.get('time', '?')}"
    if problems:
        print(f"\n{path}: {len(problems)} problem(s) found ({n} events checked, {checked}).")
        if res is not None and res.broken:
            print("Nothing more is written to this journal until 'basinmark recover SET' sets the damage aside.")
        return 1
    jid = res.journal_id or ""
    print(f"{path}: intact, {n} events ({checked} checked).\n"
          f"last event {res.last_seq}, hash {res.last_hash}\n"
          f"receipt (keep it elsewhere; 'verify --expect' checks against it):\n"
          f"{receipt(jid, res.last_seq, res.last_hash)}")
    return 0


def cmd_recover(args) -> int:
    from basinmark.core.journal import LabelJournal

    path = _existing_journal(args)
    ev = LabelJournal.recover(path, by=args.labeler, reason=args.reason)
    if ev is None:
        print(f"{path}: the journal passed its check; there is nothing to recover (nothing was written)")
        return 0
    print(f"{path}: {ev['problem_count']} problem(s) settled, recorded as event {ev['seq']}:")
    for line in ev["problems"][:20]:
        print(f"  {line}")
    if ev["set_aside_file"]:
        first, last = ev["set_aside_lines"]
        print(f"lines {first} to {last} ({ev['set_aside_bytes']} bytes) were moved to {ev['set_aside_file']} "
              f"beside the journal; {ev['kept_lines']} line(s) kept. Labels in the lines set aside no longer count: "
              "label those runs again, or import them.")
    else:
        print(f"no line was set aside; the journal's {ev['kept_lines']} lines are kept as they are and its head "
              "now records its end")
    return 0


def cmd_receipt(args) -> int:
    from basinmark.core.journal import LabelJournal
    from basinmark.core.journal_witness import receipt

    path = _existing_journal(args)
    with LabelJournal.open(path, readonly=True) as j:
        if j.problems:
            raise BasinmarkError(f"no receipt for a damaged journal: {j.integrity.summary(path)}")
        if j.integrity is not None and (j.integrity.head_lag or j.integrity.open_batch is not None):
            raise BasinmarkError(f"{path} is being written right now (or its writer stopped mid-write); "
                                 "try again in a moment")
        jid = j.header.get("hash") if j.header else None
        if not jid:
            raise BasinmarkError(f"{path} has no header; no receipt can be made")
        print(receipt(jid, j.last_seq, j.last_hash))
    return 0


def _journal_of(target: str) -> Path:
    from basinmark.core.sets import journal_path

    p = Path(target).expanduser()
    path = journal_path(p) if p.is_dir() else p
    if not path.is_file():
        raise BasinmarkError(f"there is no label journal at {path}")
    return path


def _current_classification(target: str):
    """The set's runs classified now with its rules file (for ``--labelers current ...``); nothing is written."""
    from basinmark.core.classify import classify_set
    from basinmark.core.review import current_auto_labels
    from basinmark.core.rules import load_rules
    from basinmark.core.sets import open_set, rules_path

    root = Path(target).expanduser()
    if not root.is_dir():
        raise BasinmarkError(f"{root}: 'current' classifies the runs of a set folder; give the set, not a journal")
    if not rules_path(root).is_file():
        raise BasinmarkError(f"{root}: no rules file {rules_path(root).name} to classify with ('current')")
    tset = open_set(root)
    rules = load_rules(rules_path(root), n_atoms=tset.n_atoms)
    return current_auto_labels(classify_set(tset, rules))


def cmd_compare(args) -> int:
    from basinmark.core.journal import LabelJournal
    from basinmark.core.review import CURRENT, SE_METHOD, compare_journals, compare_labelers, render_markdown

    if not 0 < args.confidence < 1:
        raise BasinmarkError("--confidence must be between 0 and 1")
    if args.labelers and args.labelers[0] == args.labelers[1]:
        raise BasinmarkError(f"--labelers names {args.labelers[0]!r} twice; choose two different label sources")
    if args.labelers:
        if args.b:
            raise BasinmarkError("give either two journals (A B) or one with --labelers X Y, not both")
        current = _current_classification(args.a) if CURRENT in args.labelers else None
        with LabelJournal.open(_journal_of(args.a), readonly=True) as j:
            _warn(j.warnings)
            try:
                review = compare_labelers(j, *args.labelers, current=current, confidence=args.confidence)
            except ValueError as exc:
                raise BasinmarkError(str(exc)) from None
    else:
        if not args.b:
            raise BasinmarkError("compare needs two journals (A B), or one set with --labelers X Y")
        review = compare_journals(_journal_of(args.a), _journal_of(args.b), which=args.use,
                                  confidence=args.confidence)
    if args.output:
        from basinmark.core.atomic_write import write_text_atomic

        write_text_atomic(args.output, render_markdown(review), what="the review report")
    if args.format == "json":
        import json

        out = review.summary()
        out["confusion"] = {str(k): {str(c): int(v) for c, v in row.items()}
                            for k, row in review.confusion.iterrows()}
        out["disagreement_list"] = review.disagreements.to_dict(orient="records")
        out["warnings"] = review.warnings
        print(json.dumps(out, indent=2))
        return 0
    r = review
    print(f"rows: {printable(r.name_a)}, columns: {printable(r.name_b)}")
    if r.n:
        print(table_text(r.confusion.reset_index().rename(columns={r.confusion.index.name: ""})))
    kap = "undefined" if not math.isfinite(r.kappa) else f"{r.kappa:.3f}"
    ci = "" if not math.isfinite(r.ci[0]) else f"  ({100 * r.confidence:g} % interval {r.ci[0]:.3f} to {r.ci[1]:.3f})"
    agree = "n/a" if not math.isfinite(r.agreement) else f"{100 * r.agreement:.1f} %"
    print(f"\nruns labeled by both: {r.n}\nagreement: {agree}\nCohen's kappa: {kap}{ci}"
          f"\nband (Landis & Koch 1977): {r.band or 'n/a'}\n(interval from the {SE_METHOD})")
    if len(r.disagreements):
        print(f"\ndisagreements ({len(r.disagreements)}):")
        print(table_text(r.disagreements))
    for w in r.warnings:
        print(f"\ncaution: {w}")
    if args.output:
        print(f"\nreport written to {args.output}")
    return 0


def cmd_export(args) -> int:
    from basinmark.core.journal import LabelJournal
    from basinmark.core.journal_io import export_labels, export_table

    hashes, notes = (None, []) if args.no_data else _hashes(args)
    with LabelJournal.open(_existing_journal(args), readonly=True) as j:
        _warn(j.warnings + notes)
        if args.output:
            path = export_labels(j, args.output, hashes)
            print(f"{len(j.state())} runs' labels written to {path}")
        else:
            state = export_table(j, hashes)
            emit(_plain(state) if args.format == "table" else state, args.format)
    return 0


def cmd_import(args) -> int:
    from basinmark.core.journal_io import import_labels

    _check_text(args)
    root = _root(args)
    allowed = _allowed(root)
    hashes, notes = _hashes(args)
    _warn(notes)
    with _open_writer(args, _journal(args), allowed) as j:
        _warn(j.warnings)
        seen = len(j.warnings)
        skipped: list[str] = []
        events = import_labels(j, args.file, runs=hashes, allowed=allowed, labeler=args.labeler, notes=skipped)
        _warn(j.warnings[seen:])
    print(f"{len(events)} labels imported from {args.file} (events {events[0]['seq']} to {events[-1]['seq']})")
    for note in skipped:
        print(f"note: {note}")
    return 0


def cmd_unlock(args) -> int:
    from basinmark.core.journal import LabelJournal

    path = _existing_journal(args)
    # (a lock whose process on this host is gone is also broken by the next writer on its own)
    ev = LabelJournal.break_lock(path, by=args.labeler, reason=args.reason, force=args.force)
    old = ev["old_lock"]
    print(f"lock of {path} held by {old.get('owner')} on {old.get('host')} (pid {old.get('pid')}) since "
          f"{old.get('time')} was broken; recorded as event {ev['seq']}")
    return 0
