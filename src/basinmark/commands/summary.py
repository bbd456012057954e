"""``basinmark summary SET``: outcome counts, product ratio with its interval, TST comparison.

Labels come from the set's label journal (final labels: the latest hand label, else the
automatic one).  When the journal holds no labels yet, the runs are classified in memory
with the set's rules, nothing is written, and the report says so.
"""

from __future__ import annotations

import sys
from pathlib import Path

import pandas as pd

from basinmark.commands._output import emit
from basinmark.core.errors import SetError

FORMATS = ("table", "csv", "json", "markdown")
UNITS = ("kcal/mol", "kJ/mol")

NOT_CLASSIFIED_NOTE = ("labels computed in memory from the rules file: not yet classified into the journal; "
                       "run `basinmark classify SET` to record these labels")


def register(sub) -> None:
    p = sub.add_parser(
        "summary", help="count outcomes and report the product ratio with intervals, next to TST",
        description="Count the final label of every run of a set, with intervals, the product ratio between "
                    "two products, the TST ratio for a given ΔΔG‡, and warnings where the numbers are thin.")
    p.add_argument("set", metavar="SET", help="the set folder")
    p.add_argument("--ratio", nargs=2, metavar=("A", "B"),
                   help="the two products to compare as A : B (default: the two most common)")
    add_tst_options(p)
    p.add_argument("--method", choices=("wilson", "exact"), default="wilson",
                   help="interval for proportions: Wilson score (default) or Clopper–Pearson exact")
    p.add_argument("--confidence", type=float, default=0.95, metavar="C", help="confidence level (default 0.95)")
    p.add_argument("--half-width", type=float, default=0.05, metavar="H",
                   help="target ± half-width on the share of A among A + B, for the runs-needed estimate (default 0.05)")
    p.add_argument("--journal", metavar="FILE", help="read this label journal instead of the set's own")
    p.add_argument("--no-recheck", dest="recheck", action="store_false",
                   help="with journal labels, skip classifying again in memory (which finds flagged runs, such as "
                        "failed energy checks, and automatic labels the current rules no longer give)")
    p.add_argument("--no-cache", action="store_true", help="ignore and do not write the parsed-array cache")
    p.add_argument("--quiet", "-q", action="store_true", help="no progress line on stderr")
    p.add_argument("--format", choices=FORMATS, default="table", help="output format (default: table)")
    p.set_defaults(func=run)


def add_tst_options(p) -> None:
    """The TST options shared by ``summary`` and ``export-summary``."""
    p.add_argument("--ddg", nargs="+", metavar="ARG",
                   help="the TST estimate as a named pair: --ddg MAJOR MINOR X, with X = ΔΔG‡ = G‡(MINOR) − "
                        "G‡(MAJOR) (positive favours MAJOR); a lone --ddg X is read as G‡(B) − G‡(A) of --ratio A B "
                        "(default: [tst] of the set's basinmark-set.toml, if any)")
    p.add_argument("--barrier", nargs=2, action="append", metavar=("PRODUCT", "X"),
                   help="a product's own free-energy barrier ΔG‡ (repeat for every product): TST then predicts "
                        "every product's share and any pair's ratio")
    p.add_argument("--no-tst", action="store_true", help="leave out the TST comparison")
    p.add_argument("--unit", choices=UNITS, default="kcal/mol",
                   help="energy unit of --ddg, --barrier and of the report (default kcal/mol)")
    p.add_argument("--temperature", type=float, default=None, metavar="K",
                   help="temperature in kelvin (default: the set's [tst] temperature, else 298.15)")


def _float(text: str, option: str) -> float:
    try:
        return float(text)
    except ValueError:
        raise SetError(f"{option}: {text!r} is not a number") from None


def command_line_tst(args, products: list[str] | None, notes: list[str] | None = None):
    """The TST estimate of ``--ddg``/``--barrier`` (None when neither is given), checked.

    Called once before the set is opened (``products=None``), so that absurd values fail at once; a lone
    ``--ddg X`` without ``--ratio`` is then left for the second call, whose message lists the products.
    """
    from basinmark.core.tst import TSTEstimate

    notes = notes if notes is not None else []
    temperature = args.temperature
    ddg = getattr(args, "ddg", None)
    barriers = getattr(args, "barrier", None)
    if getattr(args, "no_tst", False) or (ddg is None and not barriers):
        return None
    if ddg is not None and barriers:
        raise SetError("give either --ddg or --barrier, not both")
    t = 298.15 if temperature is None else temperature
    if barriers:
        values: dict[str, float] = {}
        for name, value in barriers:
            if name in values:
                raise SetError(f"--barrier {name} is given twice")
            values[name] = _float(value, f"--barrier {name}")
        return TSTEstimate.from_barriers(values, args.unit, t, origin="--barrier")
    if len(ddg) == 3:
        return TSTEstimate.pair(ddg[0], ddg[1], _float(ddg[2], "--ddg"), args.unit, t, origin="--ddg")
    if len(ddg) == 1 and args.ratio:
        a, b = args.ratio
        notes.append(f"--ddg {ddg[0]} read as ΔΔG‡ = G‡({b}) − G‡({a}) for the ratio {a} : {b} asked")
        return TSTEstimate.pair(a, b, _float(ddg[0], "--ddg"), args.unit, t, origin="--ddg")
    if len(ddg) == 1:
        if products is None:
            _float(ddg[0], "--ddg")
            return None  # said in full once the products are known
        raise SetError(f"--ddg {ddg[0]} does not say which product it favours: write --ddg MAJOR MINOR "
                       f"{ddg[0]} (ΔΔG‡ = G‡(MINOR) − G‡(MAJOR)), or name the ratio with --ratio A B "
                       f"(ΔΔG‡ = G‡(B) − G‡(A)); products: {', '.join(products) or '(none)'}")
    raise SetError(f"--ddg takes MAJOR MINOR X (or one number with --ratio A B), not {len(ddg)} values")


def tst_from_args(args, tset, products: list[str]) -> tuple[object, object, list[str], list[str]]:
    """``(estimate, measured ratio, notes, warnings)`` from the command line, else the set's manifest.

    The command line wins over the manifest; ``--no-tst`` leaves both out.  Values are checked
    (finite, |ΔΔG‡| within bounds, positive temperature) with the option or file named.
    """
    from basinmark.core.tst import TSTEstimate, unnamed_ddg_message

    notes: list[str] = []
    warnings: list[str] = []
    stated = tset.metadata.get("tst") if tset is not None else None
    measured = stated.get("experiment") if stated else None
    if getattr(args, "no_tst", False):
        return None, measured, notes, warnings
    est = command_line_tst(args, products, notes)
    if est is not None:
        return est, measured, notes, warnings
    if not stated:
        return None, measured, notes, warnings
    est = stated.get("estimate")
    where = Path(stated.get("where", "basinmark-set.toml")).name
    if est is None and stated.get("kind") == "unnamed":
        if stated["ddg"] == 0.0 and len(products) == 2:  # equal barriers: the same for either naming
            est = TSTEstimate.pair(products[0], products[1], 0.0, stated["unit"], stated["temperature"],
                                   source=stated.get("source", ""), origin=where, experiment=measured)
        else:
            warnings.append(unnamed_ddg_message(stated["ddg"], stated["unit"], f"{where} [tst]", products)
                            + " The TST comparison is left out until then.")
            return None, measured, notes, warnings
    if est is None:
        return None, measured, notes, warnings
    temperature = args.temperature
    if temperature is not None and temperature != est.temperature:
        notes.append(f"the TST estimate of {where} is stated at {est.temperature:g} K; --temperature "
                     f"{temperature:g} K applies to the effective ΔΔG only")
    notes.append(f"TST estimate ({est.text()}) from the set's {where}"
                 + (f" ({est.source})" if est.source else ""))
    return est, measured, notes, warnings


def journal_labels(path: Path, current_hashes: dict[str, str]) -> tuple[pd.DataFrame | None, list[str]]:
    """Final labels from the journal at ``path`` (None if it has none), and its warnings."""
    from basinmark.core.journal import LabelJournal

    if not path.is_file():
        return None, []
    with LabelJournal.open(path, readonly=True) as journal:
        state = journal.state(current_hashes=current_hashes)
        notes = [f"journal: {w}" for w in journal.warnings]
    if state.empty or state["final_label"].isna().all():
        return None, notes
    return state, notes


def classify_in_memory(tset, rules) -> pd.DataFrame:
    """Classify every run in memory (nothing written): run, outcome, flags; notes in ``attrs``."""
    from basinmark.core.classify import classify_set

    table = classify_set(tset, rules)
    out = pd.DataFrame({"run": table["run"].astype(str), "outcome": table["outcome"].astype(str),
                        "flags": table["flags"].fillna("").astype(str) if "flags" in table else ""})
    out.attrs["notes"] = list(table.attrs.get("notes", []))
    return out


def stale_auto_labels(labels: pd.DataFrame, classified: pd.DataFrame) -> list[str]:
    """A warning (naming its runs) when the journal's automatic labels differ from what the current rules give."""
    from basinmark.core.summary import SummaryWarning

    if "auto_label" not in labels:
        return []
    now = dict(zip(classified["run"], classified["outcome"]))
    pairs = [(r, a, now[r]) for r, a in zip(labels["run"], labels["auto_label"]) if isinstance(a, str) and r in now]
    differ = [r for r, a, b in pairs if a != b]
    if not differ:
        return []
    return [SummaryWarning(f"{len(differ)} of {len(pairs)} automatic labels in the journal differ from what the "
                           f"current rules give: the rules (or the runs) have changed since they were recorded, so "
                           f"run `basinmark classify SET` again before trusting the counts.", differ)]


def in_set_order(labels: pd.DataFrame, run_ids: list[str]) -> tuple[pd.DataFrame, list]:
    """Labels ordered as the set's runs (unlabeled runs added with no label), plus warnings.

    Labels of runs that are not in the set are left out (the set folder says which runs are counted, as in the
    window) and named in a warning: they stay in the journal."""
    from basinmark.core.summary import outside_set_warning

    labels = labels.drop_duplicates("run", keep="last").set_index("run", drop=False)
    # one hashed membership test per side (linear in runs + labels; sets of 10^5 runs are ordinary)
    ids = pd.Index(list(run_ids))
    has_label = ids.isin(labels.index)
    known = list(ids[has_label])
    missing = list(ids[~has_label])
    labeled = labels["final_label"].notna().to_numpy() if "final_label" in labels else True
    gone = sorted(labels.index[~labels.index.isin(ids) & labeled])
    parts = [labels.loc[known]]
    if missing:
        parts.append(pd.DataFrame({"run": missing, "final_label": [None] * len(missing)}))
    out = pd.concat(parts, ignore_index=True)
    said = outside_set_warning(gone)
    return out, [said] if said is not None else []


def fill_unlabeled(labels: pd.DataFrame, tset, rules, classified: pd.DataFrame | None = None) -> tuple[pd.DataFrame, int]:
    """Runs of the set with no label in the journal get the rules' automatic label, computed in memory (only those
    runs are classified, unless ``classified`` already holds them), as the window shows and counts them.  Returns
    the table and how many runs got a label."""
    from basinmark.core.model import TrajectorySet

    missing = labels["final_label"].isna().to_numpy()
    runs = [r for r in labels["run"][missing].astype(str) if r in tset]
    if not runs:
        return labels, 0
    if classified is None:
        part = TrajectorySet(tset.root, {r: tset[r] for r in runs}, metadata=dict(tset.metadata))
        classified = classify_in_memory(part, rules)
    now = dict(zip(classified["run"].astype(str), classified["outcome"]))
    flags = dict(zip(classified["run"].astype(str), classified["flags"])) if "flags" in classified else {}
    labels = labels.copy()
    rows = labels.index[missing]
    values = [now.get(str(r)) for r in labels.loc[rows, "run"]]
    labels.loc[rows, "final_label"] = values
    if "auto_label" not in labels:
        labels["auto_label"] = None
    labels.loc[rows, "auto_label"] = values
    if "flags" in labels:
        labels.loc[rows, "flags"] = [flags.get(str(r), "") for r in labels.loc[rows, "run"]]
    return labels, sum(v is not None for v in values)


def make_summary(args):
    """Open the set and its labels and build the :class:`~basinmark.core.summary.Summary`."""
    from basinmark.commands._output import progress_printer
    from basinmark.core.rules import load_rules
    from basinmark.core.sets import journal_path, open_set, rules_path
    from basinmark.core.summary import build_summary

    root = Path(args.set)
    if not root.is_dir():
        raise SetError(f"{root}: not a folder (a set is a folder of runs)")
    command_line_tst(args, None)  # absurd TST values fail before the set is read
    tset = open_set(root, progress=progress_printer(args.quiet), use_cache=not args.no_cache)
    rules_file = rules_path(root)
    rules = load_rules(rules_file, n_atoms=tset.n_atoms) if rules_file.is_file() else None
    jpath = Path(args.journal) if args.journal else journal_path(root)
    if args.journal and not jpath.is_file():
        raise SetError(f"{jpath}: no label journal there (check the path given with --journal)")
    labels, notes = journal_labels(jpath, dict(tset.content_hashes()))
    extra: list[str] = []
    if labels is None:
        if rules is None:
            raise SetError(f"{root}: no labels in {jpath.name} and no rules file {rules_file.name} to classify with")
        classified = classify_in_memory(tset, rules)
        labels = classified.rename(columns={"outcome": "final_label"})
        notes.insert(0, NOT_CLASSIFIED_NOTE)
        notes += classified.attrs["notes"]
    elif rules is not None and args.recheck:
        # classify again in memory for the flags (energy check, ...) and to catch stale automatic labels
        classified = classify_in_memory(tset, rules)
        labels = labels.merge(classified[["run", "flags"]], on="run", how="left")
        extra += stale_auto_labels(labels, classified)
        notes += classified.attrs["notes"]
    labels, outside = in_set_order(labels, tset.run_ids)
    extra += outside
    if rules is not None:
        labels, filled = fill_unlabeled(labels, tset, rules, classified if args.recheck else None)
        if filled:
            many = filled != 1
            notes.append(f"{filled} run{'s' if many else ''} of the set {'have' if many else 'has'} no label in the "
                         f"journal: {'their' if many else 'its'} automatic label{'s were' if many else ' was'} "
                         "computed in memory from the rules, as the window shows them; run `basinmark classify SET` "
                         "to record them")
    if rules is not None:
        products = list(rules.products)
    else:
        from basinmark.core.labels import FIXED_LABELS
        products = sorted({str(v) for v in labels["final_label"].dropna()} - set(FIXED_LABELS))
        notes.append(f"no rules file {rules_file.name}: taking every label other than the fixed ones as a "
                     f"product ({', '.join(products)})")
    if tset.failures:
        notes.append(f"{len(tset.failures)} file(s) of the set failed to load; `basinmark info SET` lists them")
    notes += tset.warnings
    a, b = args.ratio if args.ratio else (None, None)
    tst, measured, tst_notes, tst_warnings = tst_from_args(args, tset, products)
    notes += tst_notes
    extra += tst_warnings
    temperature = args.temperature
    if temperature is None:
        temperature = tst.temperature if tst is not None else 298.15
    return build_summary(labels, products, a, b, unit=args.unit, temperature=temperature,
                         confidence=args.confidence, method=args.method, half_width=args.half_width, notes=notes,
                         extra_warnings=extra, tst=tst, experiment=measured)


def run(args) -> int:
    summary = make_summary(args)
    out = sys.stdout
    if args.format == "csv":
        emit(summary.to_frame(), "csv", out)
    elif args.format == "json":
        out.write(summary.to_json() + "\n")
    elif args.format == "markdown":
        out.write(summary.to_markdown())
    else:
        out.write(summary.to_text())
    if args.format in ("csv", "json"):  # keep machine output clean; say the important things on stderr
        for line in summary.notes + summary.warnings:
            print(f"basinmark: {line}", file=sys.stderr)
    return 0 if summary.n_counted > 0 else 1
