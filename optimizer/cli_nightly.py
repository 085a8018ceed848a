"""``beltwave nightly``: the unattended job (see optimizer.jobs for what it does and its exit codes)."""
from __future__ import annotations

import json
import sys

from .config import load_plant
from .errors import InputError


def cmd_nightly(args) -> int:
    from .jobs import DaskExecutor, SerialExecutor, run_nightly

    plant, warnings = load_plant(args.config)
    for w in warnings:
        print(f"warning: {w}", file=sys.stderr)
    if args.scheduler and args.workers:
        raise InputError("give --scheduler ADDRESS (an existing Dask cluster) or --workers N (a local one), not both")
    executor = DaskExecutor(args.scheduler, args.workers) if (args.scheduler or args.workers) else SerialExecutor()
    try:
        result = run_nightly(plant, plan_path=args.plan, plan_date=args.date, dry_run=args.dry_run, executor=executor)
    finally:
        executor.close()
    if args.json:
        print(json.dumps({"status": result.status, "exit_code": result.exit_code, "summary": result.summary},
                         indent=2, default=str))
    else:
        for line in result.lines:
            print(line)
        for e in result.summary.get("errors", []):
            print(f"error: {e}")
        print(f"nightly: {result.status} (exit {result.exit_code})")
    return result.exit_code


def add_nightly_parser(sub) -> None:
    p = sub.add_parser("nightly", help="ingest new logs, refit, gate, recommend, export (the scheduled job)",
                       description="Exit codes: 0 all good; 3 finished with warnings; 4 failed (the other groups "
                                   "were completed); 5 another run holds the lock.")
    p.add_argument("--config", required=True, help="plant description (TOML)")
    p.add_argument("--plan", help="plan CSV (date, line_id, product_id, planned_tonnes or planned_hours, …)")
    p.add_argument("--date", help="plan date YYYY-MM-DD (default: today, UTC)")
    p.add_argument("--dry-run", action="store_true", help="say what would be done, change nothing")
    p.add_argument("--scheduler", help="address of an existing Dask scheduler, e.g. tcp://10.0.0.5:8786")
    p.add_argument("--workers", type=int, help="start a local Dask cluster with N workers")
    p.add_argument("--json", action="store_true", help="print the run summary as JSON")
    p.set_defaults(func=cmd_nightly)
