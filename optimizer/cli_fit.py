"""``beltwave fit`` and ``beltwave models``: train, gate, list and activate model versions."""
from __future__ import annotations

import json

from .config import load_plant
from .errors import DataError
from .store import Store

EXIT_OK, EXIT_PROBLEMS, EXIT_USAGE = 0, 1, 2


def _print_decision(d) -> None:
    pf = d.fit
    print(f"\n{d.line_id} × {d.product_id}: {pf.status}"
          + (f", {pf.observations} observations, lots {len(pf.lots_train)} fitted / "
             f"{len(pf.lots_holdout)} held out" if pf.status == "fitted" else ""))
    if pf.status != "fitted":
        print(f"  {pf.message}")
        return
    print(f"  {'parameter':<34} {'value':>11} {'95 % interval':>25}  unit")
    for r in pf.parameters:
        label = r["name"]
        ci = "" if r["low95"] is None else f"{r['low95']:.4g} … {r['high95']:.4g}"
        boot = f"   (bootstrap σ {r['bootstrap_stderr']:.3g})" if r.get("bootstrap_stderr") else ""
        print(f"  {label:<34} {r['value']:>11.4g} {ci:>25}  {r['unit']}{boot}")
    if pf.scores:
        print(f"  held-out MAE [K or % points]   {'model':>8} {'defaults':>9} {'linear':>8} {'active':>8}")
        for ch, s in pf.scores.get("model", {}).items():
            cells = [pf.scores.get(k, {}).get(ch) for k in ("defaults", "linear", "active")]
            print(f"  {ch:<30} {s.mae:>8.3f} " + " ".join(f"{c.mae:>8.3f}" if c else f"{'–':>8}" for c in cells)
                  + f"   (bias {s.bias:+.3f})")
        if pf.beats_baselines is False:
            print("  the physical model does NOT beat both baselines on every channel")
    for w in pf.warnings:
        print(f"  warning: {w}")
    print(f"  decision: version {d.version_id} — {d.reason}")


def cmd_fit(args) -> int:
    from .train import train

    plant, _ = load_plant(args.config)
    store = Store.open(plant.store_url)
    try:
        options = {"bootstrap": args.bootstrap} if args.bootstrap else None
        decisions, alerts, reports = train(plant, store, args.line, args.product, options=options)
    finally:
        store.close()
    if args.json:
        print(json.dumps({"decisions": [d.to_json() | {"fit": d.fit.summary()} for d in decisions],
                          "alerts": alerts}, indent=2, default=str))
    else:
        for d in decisions:
            _print_decision(d)
        for a in alerts:
            print(f"ALERT: {a['message']}")
    return EXIT_OK


def cmd_models(args) -> int:
    plant, _ = load_plant(args.config)
    store = Store.open(plant.store_url)
    try:
        if args.action == "activate":
            if args.version is None or not args.reason:
                raise DataError("models activate needs a VERSION and --reason TEXT (the reason is recorded)")
            store.activate_model(int(args.version), f"engineer override: {args.reason}")
            print(f"model version {args.version} is now active ({args.reason})")
            return EXIT_OK
        df = store.model_versions(args.line, args.product)
    finally:
        store.close()
    if args.json:
        print(df.to_json(orient="records", date_format="iso"))
        return EXIT_OK
    if df.empty:
        print("no model versions yet: run `beltwave fit --config FILE` (or the nightly job)")
        return EXIT_OK
    print(f"{'version':>7}  {'line':<8} {'product':<18} {'status':<9} {'active':<6} created (UTC)         reason")
    for r in df.itertuples():
        print(f"{r.id:>7}  {r.line_id:<8} {r.product_id:<18} {r.status:<9} {'yes' if r.active else '':<6} "
              f"{str(r.created_utc)[:19]:<21} {r.reason}")
    return EXIT_OK


def add_fit_parsers(sub) -> None:
    fit = sub.add_parser("fit", help="fit models to the stored logs, gate them, store new versions")
    fit.add_argument("--config", required=True, help="plant description (TOML)")
    fit.add_argument("--line", help="only this line")
    fit.add_argument("--product", help="only this product")
    fit.add_argument("--bootstrap", type=int, default=0, metavar="N",
                     help="also estimate standard errors from N refits on lots drawn with replacement")
    fit.add_argument("--json", action="store_true", help="print one JSON object")
    fit.set_defaults(func=cmd_fit)
    models = sub.add_parser("models", help="list model versions, or activate one (engineer override)")
    models.add_argument("action", nargs="?", choices=("list", "activate"), default="list")
    models.add_argument("version", nargs="?", help="with activate: the version id")
    models.add_argument("--config", required=True, help="plant description (TOML)")
    models.add_argument("--line")
    models.add_argument("--product")
    models.add_argument("--reason", help="with activate: why (recorded with the activation)")
    models.add_argument("--json", action="store_true")
    models.set_defaults(func=cmd_models)
