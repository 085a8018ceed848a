"""``beltwave ingest`` and ``beltwave quarantine``: thin parsers over ``optimizer.ingest``.

``ingest`` exits 0 when at least one file could be read (ingested now or before) and 1 when
nothing could be read; ``quarantine`` exits 0. Domain errors (a broken plant description, a
store that cannot be opened) propagate as ``BeltwaveError`` for the main CLI to print.
"""
from __future__ import annotations

import argparse
import json
import logging
import os

from .config import load_plant
from .errors import InputError
from .ingest import FileReport, ingest_paths, quarantine_rows, update_windows
from .logs.validate import REASONS
from .store import Store

log = logging.getLogger(__name__)

EXIT_OK = 0
EXIT_NOTHING_READ = 1


def _positive_int(text: str) -> int:
    try:
        value = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"'{text}' is not a whole number") from None
    if value < 1:
        raise argparse.ArgumentTypeError(f"{value} must be at least 1")
    return value


def add_ingest_parsers(subparsers) -> None:
    """Register the ``ingest`` and ``quarantine`` subcommands on an argparse subparsers object."""
    ing = subparsers.add_parser(
        "ingest", help="read historian CSV logs and QA samples into the store",
        description="Read process logs and QA probe files (.csv, .csv.gz, folders of them) into the store: "
                    "map and convert columns, validate every row, skip duplicates, quarantine bad rows with "
                    "a reason. Prints a summary per file.")
    ing.add_argument("--config", required=True, metavar="FILE", help="plant description (TOML)")
    ing.add_argument("paths", nargs="*", metavar="PATH",
                     help="log files or folders (default: [paths] incoming of the plant description)")
    ing.add_argument("--json", action="store_true", help="print the reports as one JSON object")
    ing.add_argument("--no-segment", action="store_true",
                     help="do not recompute the steady windows of the lots that gained samples")
    ing.set_defaults(func=cmd_ingest)

    qua = subparsers.add_parser(
        "quarantine", help="list quarantined rows by reason",
        description="List the rows the ingest did not accept, grouped by reason, with file, row number, "
                    "detail and the row as written, so the mapping or the export can be fixed and re-ingested.")
    qua.add_argument("--config", required=True, metavar="FILE", help="plant description (TOML)")
    qua.add_argument("--reason", choices=list(REASONS), help="only this reason")
    qua.add_argument("--limit", type=_positive_int, default=5, metavar="N", help="rows listed per reason (default 5)")
    qua.add_argument("--json", action="store_true", help="print summary and rows as one JSON object")
    qua.set_defaults(func=cmd_quarantine)


def cmd_ingest(args) -> int:
    plant, warnings = load_plant(args.config)
    for w in warnings:
        log.warning("%s: %s", args.config, w)
    paths = args.paths or [str(p) for p in plant.incoming_dirs]
    if not paths:
        raise InputError("no PATH given and the plant description has no [paths] incoming; give files or folders")
    with Store.open(plant.store_url) as store:
        reports = ingest_paths(plant, store, paths, progress=True, segment=False)
        segmented = {} if args.no_segment else update_windows(plant, store)
    totals = _totals(reports)
    if args.json:
        print(json.dumps({"store": plant.store_url, "files": [r.to_dict() for r in reports], "totals": totals,
                          "segmented": segmented}, indent=2))
    else:
        for r in reports:
            print("\n".join(_report_lines(r)))
        print(_totals_line(totals))
        for line_id, done in segmented.items():
            flags = ", ".join(f"{k} {v}" for k, v in done["flags"].items() if v) or "none"
            print(f"{line_id}: steady windows of {done['lots']} lot(s) recomputed ({done['windows']} windows); "
                  f"flagged samples in their span: {flags}")
    if not reports:
        log.error("no .csv or .csv.gz files found in %s", ", ".join(paths))
    return EXIT_OK if any(r.status != "rejected" for r in reports) else EXIT_NOTHING_READ


def cmd_quarantine(args) -> int:
    plant, _ = load_plant(args.config)
    with Store.open(plant.store_url, readonly=True) as store:
        summary = store.quarantine_summary()
        rows = quarantine_rows(store, reason=args.reason, limit=args.limit)
    if args.reason:
        summary = summary[summary["reason"] == args.reason]
    if args.json:
        print(json.dumps({
            "store": plant.store_url,
            "summary": [{**r, "meaning": REASONS.get(r["reason"], "")} for r in summary.to_dict("records")],
            "rows": rows.to_dict("records")}, indent=2, default=int))
        return EXIT_OK
    total = int(summary["rows"].sum()) if len(summary) else 0
    print(f"Quarantined rows (latest reading of each file): {total}")
    for r in summary.itertuples():
        print(f"  {r.reason:<24} {r.rows:>7} rows in {r.files} file(s)   {REASONS.get(r.reason, '')}")
    for reason, part in rows.groupby("reason", sort=False):
        print(f"\n{reason} (first {len(part)}):")
        for q in part.itertuples():
            print(f"  {_short(q.path)}:{q.row_number}  {q.detail}")
            print(f"      {q.raw_text[:160]}")
    if total:
        print("\nFix the export or the line's [columns]/[units]/[csv] in the plant description, then run "
              "`beltwave ingest` on the files again: rows already stored are skipped.")
    return EXIT_OK


def _short(path: str) -> str:
    try:
        return os.path.relpath(path)
    except ValueError:
        return path


def _report_lines(r: FileReport) -> list[str]:
    what = ", ".join(x for x in [r.kind, ", ".join(r.line_ids)] if x)
    out = [f"{_short(r.path)} — {r.status.replace('_', ' ')}" + (f" ({what})" if what else "")]
    if r.status == "rejected":
        out.append(f"  not read: {r.error}")
    elif r.status == "ingested":
        reasons = ", ".join(f"{k} {v}" for k, v in r.quarantined.items())
        out.append(f"  rows {r.rows_read}: {r.accepted} accepted, {r.duplicates} duplicates skipped, "
                   f"{r.quarantined_total} quarantined" + (f" ({reasons})" if reasons else ""))
        lots = ", ".join(r.lots[:6]) + (", …" if len(r.lots) > 6 else "")
        out.append(f"  {len(r.lots)} lot(s)" + (f": {lots}" if lots else "")
                   + (f"; {r.first_utc} … {r.last_utc}" if r.first_utc else ""))
        if r.out_of_order:
            out.append(f"  {r.out_of_order} row(s) out of time order (stored in order)")
    out.extend(f"  warning: {w}" for w in r.warnings)
    return out


def _totals(reports: list[FileReport]) -> dict:
    quarantined: dict[str, int] = {}
    for r in reports:
        for k, v in r.quarantined.items():
            quarantined[k] = quarantined.get(k, 0) + v
    return {
        "files": len(reports),
        "ingested": sum(r.status == "ingested" for r in reports),
        "already_ingested": sum(r.status == "already_ingested" for r in reports),
        "rejected": sum(r.status == "rejected" for r in reports),
        "rows_read": sum(r.rows_read for r in reports),
        "accepted": sum(r.accepted for r in reports),
        "duplicates": sum(r.duplicates for r in reports),
        "quarantined": quarantined,
    }


def _totals_line(t: dict) -> str:
    q = sum(t["quarantined"].values())
    return (f"\n{t['files']} file(s): {t['ingested']} ingested, {t['already_ingested']} already ingested, "
            f"{t['rejected']} rejected; rows {t['rows_read']}: {t['accepted']} accepted, {t['duplicates']} duplicates "
            f"skipped, {q} quarantined")


__all__ = ["add_ingest_parsers", "cmd_ingest", "cmd_quarantine"]
