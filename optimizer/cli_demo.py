"""``beltwave demo``: the invented demo plant end to end on the embedded SQLite store.

Generates some weeks of historian logs for configs/demo.toml with our own generator (built
on the line model, with the faults real exports have), runs the nightly job on them, and
says where the results are and how to open the dashboard.
"""
from __future__ import annotations

import datetime as dt
import json
import shutil
import sys
from pathlib import Path

from .config import load_plant

DEFAULT_CONFIG = Path(__file__).resolve().parents[1] / "configs" / "demo.toml"


class DemoStoreError(Exception):
    """The demo cannot start afresh on this store."""


def set_previous_demo_aside(plant, incoming: Path) -> Path | None:
    """Move the last demo's store, logs and exports into ``previous-demo-<UTC time>/`` beside
    the incoming folder, so that a fresh demo starts on an empty store (new logs for the same
    days would otherwise be dropped as duplicates of the stored samples). Only what the demo
    made moves: its SQLite store, the files its manifest lists, its exports. Nothing is deleted.
    Returns the folder, or None when there was nothing to move.
    """
    from sqlalchemy.engine import make_url

    from .demo import demo_manifest_path
    from .jobs import exclusive_lock, plant_paths

    url = make_url(plant.store_url)
    if url.get_backend_name() != "sqlite" or url.database in (None, "", ":memory:"):
        raise DemoStoreError(f"the store {plant.store_url} is not a SQLite file; --fresh only sets aside the "
                             "demo's own SQLite store. Point [store] url at a new database for a fresh demo.")
    store = Path(url.database)
    manifest_path = demo_manifest_path(incoming)
    logs = []
    if manifest_path.exists():
        logs = [incoming / name for name in json.loads(manifest_path.read_text())["files"]] + [manifest_path]
    exports = sorted(plant.export_dir.glob("*")) if plant.export_dir.is_dir() else []
    moving = [(f, part) for part, files in (("store", [Path(f"{store}{s}") for s in ("", "-wal", "-shm")]),
                                            ("incoming", logs), ("exports", exports))
              for f in files if f.exists()]
    if not moving:
        return None
    stamp = dt.datetime.now(dt.timezone.utc).strftime("%Y%m%dT%H%M%SZ")
    aside = incoming.parent / f"previous-demo-{stamp}"
    with exclusive_lock(plant_paths(plant)["lock"]):  # no nightly run writes meanwhile
        for f, part in moving:
            (aside / part).mkdir(parents=True, exist_ok=True)
            shutil.move(f, aside / part / f.name)
    return aside


def cmd_demo(args) -> int:
    from .demo import demo_manifest_path, generate_demo_logs
    from .jobs import EXIT_FAILED, LockHeld, run_nightly

    plant, _ = load_plant(args.config)
    if not plant.incoming_dirs:
        print(f"{args.config}: [paths] incoming is empty; the demo needs a folder to write its logs to",
              file=sys.stderr)
        return EXIT_FAILED
    incoming = plant.incoming_dirs[0]
    manifest_path = demo_manifest_path(incoming)
    if manifest_path.exists() and not args.fresh:
        manifest = json.loads(manifest_path.read_text())
        print(f"demo logs already in {incoming} ({manifest['days']} days from {manifest['start']}); "
              "--fresh makes new ones")
    else:
        if args.fresh:
            try:
                aside = set_previous_demo_aside(plant, incoming)
            except (DemoStoreError, LockHeld) as exc:
                print(f"demo --fresh: {exc}", file=sys.stderr)
                return EXIT_FAILED
            if aside is not None:
                print(f"the previous demo (store, logs, exports) is kept in {aside}; delete it when done with it")
        print(f"generating {args.days} days of historian logs for {len(plant.lines)} lines into {incoming} …")
        generate_demo_logs(plant, incoming, start=args.start, days=args.days, interval_s=args.interval_s,
                           seed=args.seed)
        manifest = json.loads(manifest_path.read_text())
    last_day = dt.date.fromisoformat(manifest["start"]) + dt.timedelta(days=int(manifest["days"]))
    print(f"running the nightly job (plan date {last_day}) …")
    result = run_nightly(plant, plan_date=last_day.isoformat())
    for line in result.lines:
        print(f"  {line}")
    for e in result.summary.get("errors", []):
        print(f"  error: {e}")
    print(f"nightly: {result.status} (exit {result.exit_code})")
    print(f"store: {plant.store_url}")
    print(f"recommendations exported to: {plant.export_dir}")
    print(f"dashboard: beltwave serve --config {args.config}   (then open http://127.0.0.1:8050/)")
    if args.serve:
        from .cli import cmd_serve

        args.host, args.port = "127.0.0.1", 8050
        return cmd_serve(args)
    return 0 if result.exit_code in (0, 3) else result.exit_code


def add_demo_parser(sub) -> None:
    p = sub.add_parser("demo", help="generate the demo plant's logs, run the nightly job, show where results are")
    p.add_argument("--config", default=str(DEFAULT_CONFIG), help="plant description (default: configs/demo.toml)")
    p.add_argument("--days", type=int, default=21, help="days of logs to generate (default 21)")
    p.add_argument("--start", default="2026-10-12", help="first local day (default 2026-10-12; spans the "
                                                          "end of daylight saving)")
    p.add_argument("--interval-s", type=int, default=30, help="historian sample interval [s] (default 30)")
    p.add_argument("--seed", type=int, default=2026, help="seed of the generator (same seed, same files)")
    p.add_argument("--fresh", action="store_true", help="start afresh: set the last demo's store, logs and exports "
                   "aside (into previous-demo-<time>/, nothing is deleted) and generate new logs")
    p.add_argument("--serve", action="store_true", help="start the dashboard afterwards")
    p.set_defaults(func=cmd_demo)
