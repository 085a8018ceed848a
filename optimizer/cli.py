"""The ``beltwave`` command line: thin parsers over library calls.

Exit codes: 0 success; 1 the job ran but failed or found problems (e.g. a config with
errors); 2 bad command-line input or a domain error reported as one message.
"""
from __future__ import annotations

import argparse
import json
import logging
import sys

from . import __version__
from .config import load_plant
from .errors import BeltwaveError, ConfigError

EXIT_OK = 0
EXIT_PROBLEMS = 1
EXIT_USAGE = 2

CAUTION = ("Advisory only: verify predicted temperatures with a probe on the first lot; microwave/RF "
           "installations and food safety follow local codes and licensed practice.")


def _floats(text: str) -> list[float]:
    try:
        return [float(x) for x in text.split(",") if x.strip()]
    except ValueError:
        raise argparse.ArgumentTypeError(f"'{text}' is not a comma-separated list of numbers (kW), "
                                         "e.g. 20,18.5,15") from None


def cmd_config_check(args) -> int:
    try:
        plant, warnings = load_plant(args.file)
    except ConfigError as exc:
        print(str(exc), file=sys.stderr)
        print("Fix the listed keys and run `beltwave config check` again.", file=sys.stderr)
        return EXIT_PROBLEMS
    for w in warnings:
        print(f"warning: {w}")
    print(f"{args.file}: OK — {len(plant.lines)} line(s), {len(plant.products)} product(s)")
    for line in plant.lines.values():
        print(f"  {line.line_id}: {line.kind}, {line.frequency_hz / 1e6:g} MHz, {line.zone_count} zones, "
              f"{line.tunnel_length_m:g} m tunnel, products {', '.join(line.products)}")
    return EXIT_OK


def _profile_lines(record: dict, width: int = 40) -> list[str]:
    prof = record.get("profile")
    if not prof:
        return []
    pos = prof["position_m"]
    rows = ["", "Temperature along the tunnel [°C] (outer layers: hot share, cold share; core at mid-thickness)"]
    step = max(1, len(pos) // 12)
    for i in list(range(0, len(pos), step)) + ([len(pos) - 1] if (len(pos) - 1) % step else []):
        line = f"  {pos[i]:6.2f} m   hot {prof['hot_c'][i]:7.2f}   cold {prof['cold_c'][i]:7.2f}   " \
               f"core {prof['core_c'][i]:7.2f}"
        if "moisture_pct_wb" in prof:
            line += f"   moisture {prof['moisture_pct_wb'][i]:5.2f} % wb"
        rows.append(line)
    return rows


def _print_record(record: dict):
    p = record["predicted"]
    print(f"Line {record['line_id']} · product {record['product_id']}  ({record['model']})")
    print(f"  belt speed {record['belt_speed_m_per_min']:g} m/min; zone forward power [kW]: "
          + ", ".join(f"{x:g}" for x in record["zone_forward_kw"]))
    print("  inputs: " + ", ".join(f"{k} {v:g}" for k, v in record["inputs"].items() if v is not None))
    print()
    print("Predicted outfeed                       value")
    print(f"  array reading mean / min / max [°C]  {p['outfeed_temp_mean_c']:7.2f} / "
          f"{p['outfeed_temp_min_c']:7.2f} / {p['outfeed_temp_max_c']:7.2f}")
    print(f"  core (mid-thickness) [°C]            {p['core_temp_c']:7.2f}")
    print(f"  hottest / coldest point [°C]         {p['hottest_temp_c']:7.2f} / {p['coldest_temp_c']:7.2f}")
    if "outfeed_moisture_pct_wb" in p:
        print(f"  hottest during passage [°C]          {p['hottest_during_passage_c']:7.2f}")
        print(f"  outfeed moisture [% wb]              {p['outfeed_moisture_pct_wb']:7.2f}")
    print(f"  specific energy [kWh/t]              {record['specific_energy_kwh_per_t']:7.2f}")
    print(f"  throughput [kg/h]                    {record['throughput_kg_per_h']:7.1f}")
    print(f"  residence time [s]                   {record['residence_time_s']:7.1f}")
    print()
    print("Targets                                  met   margin")
    for name, t in record["targets_met"].items():
        print(f"  {t['target']:<38} {'yes' if t['met'] else 'NO ':<5} {t['margin']:+.2f} {t['unit']}")
    for row in _profile_lines(record):
        print(row)
    print()
    print(CAUTION)


def cmd_simulate(args) -> int:
    from .simulate import WhatIf, run_what_if

    plant, _ = load_plant(args.config)
    what_if = WhatIf(
        belt_speed_m_per_min=args.belt_speed, zone_forward_kw=tuple(args.zone_power),
        infeed_temp_c=args.infeed_temp_c, belt_load_kg_per_m=args.belt_load_kg_per_m,
        air_temp_c=args.air_temp_c, infeed_moisture_pct_wb=args.infeed_moisture_pct_wb,
        air_rh_pct=args.air_rh_pct)
    record = run_what_if(plant, args.line, args.product, what_if)
    if args.json:
        print(json.dumps(record, indent=2))
    else:
        _print_record(record)
    return EXIT_OK


def cmd_serve(args) -> int:
    from dashboard.app import create_app
    from dashboard.data import open_reader

    plant, _ = load_plant(args.config)
    app = create_app(plant, open_reader(plant))
    if args.host not in ("127.0.0.1", "localhost", "::1"):
        logging.getLogger(__name__).warning(
            "serving on %s: anyone who can reach it sees the plant's data; put it behind a production "
            "server with authentication (see DEVELOPERS.md)", args.host)
    print(f"beltwave dashboard on http://{args.host}:{args.port}/  (Ctrl+C stops it)")
    app.run(host=args.host, port=args.port, debug=False)
    return EXIT_OK


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(prog="beltwave", description=(
        "Fit, simulate and tune microwave/RF conveyor tempering and drying lines from historian logs."))
    parser.add_argument("--version", action="version", version=f"beltwave {__version__}")
    parser.add_argument("-v", "--verbose", action="store_true", help="log progress details to stderr")
    sub = parser.add_subparsers(dest="command", required=True)

    cfg = sub.add_parser("config", help="work with plant description files")
    cfg_sub = cfg.add_subparsers(dest="config_command", required=True)
    check = cfg_sub.add_parser("check", help="validate a plant description and list every problem")
    check.add_argument("file", help="plant description (TOML)")
    check.set_defaults(func=cmd_config_check)

    sim = sub.add_parser("simulate", help="what-if: predict the outfeed for given settings")
    sim.add_argument("--config", required=True, help="plant description (TOML)")
    sim.add_argument("--line", required=True, help="line id")
    sim.add_argument("--product", required=True, help="product id")
    sim.add_argument("--belt-speed", type=float, required=True, metavar="M_PER_MIN",
                     help="belt speed [m/min]")
    sim.add_argument("--zone-power", type=_floats, required=True, metavar="KW,KW,...",
                     help="forward power per zone [kW], comma-separated, one per zone")
    sim.add_argument("--infeed-temp-c", type=float, help="product temperature at the infeed [°C]")
    sim.add_argument("--belt-load-kg-per-m", type=float, help="product mass per metre of belt [kg/m]")
    sim.add_argument("--air-temp-c", type=float, help="tunnel air temperature [°C]")
    sim.add_argument("--infeed-moisture-pct-wb", type=float, help="dryers: infeed moisture [%% wet basis]")
    sim.add_argument("--air-rh-pct", type=float, help="dryers: tunnel air relative humidity [%%]")
    sim.add_argument("--json", action="store_true", help="print one JSON object")
    sim.set_defaults(func=cmd_simulate)

    from .cli_fit import add_fit_parsers
    from .cli_demo import add_demo_parser
    from .cli_ingest import add_ingest_parsers
    from .cli_nightly import add_nightly_parser
    from .cli_recommend import add_recommend_parser

    add_ingest_parsers(sub)
    add_recommend_parser(sub)
    add_fit_parsers(sub)
    add_nightly_parser(sub)
    add_demo_parser(sub)

    srv = sub.add_parser("serve", help="start the dashboard (reads the store, never writes models)")
    srv.add_argument("--config", required=True, help="plant description (TOML)")
    srv.add_argument("--host", default="127.0.0.1", help="address to listen on (default: this machine only)")
    srv.add_argument("--port", type=int, default=8050, help="port (default 8050)")
    srv.set_defaults(func=cmd_serve)
    return parser


def main(argv: list[str] | None = None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    handler = logging.StreamHandler(sys.stderr)
    handler.setLevel(logging.INFO if args.verbose else logging.WARNING)
    handler.setFormatter(logging.Formatter("%(asctime)s %(levelname)s %(name)s: %(message)s"))
    logging.getLogger().addHandler(handler)
    logging.getLogger().setLevel(logging.INFO)  # files (the nightly log) get INFO; the terminal what -v asks
    try:
        return int(args.func(args) or 0)
    except BeltwaveError as exc:
        print(f"beltwave: {exc}", file=sys.stderr)
        return EXIT_USAGE


if __name__ == "__main__":
    sys.exit(main())
