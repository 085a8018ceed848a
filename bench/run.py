"""Run every benchmark and print measured figure, baseline, ratio and target, one line each.

    python -m bench.run [--quick] [--only NAME] [--json]

Benchmarks are not part of the test suite's pass/fail: machines are shared and noisy, so
each figure comes with a baseline measured in the same run.
"""
from __future__ import annotations

import argparse
import importlib
import json
import sys

BENCHMARKS = ("bench_line", "bench_ingest", "bench_recommend", "bench_fit", "bench_nightly", "bench_dashboard")


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(prog="python -m bench.run", description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="small sizes, for a smoke run")
    ap.add_argument("--only", choices=BENCHMARKS, help="run one benchmark module")
    ap.add_argument("--json", action="store_true", help="print the results as JSON")
    args = ap.parse_args(argv)
    rows = []
    for name in BENCHMARKS:
        if args.only and name != args.only:
            continue
        module = importlib.import_module(f"bench.{name}")
        rows.extend(module.run(quick=args.quick))
    if args.json:
        print(json.dumps(rows, indent=2))
        return 0
    print(f"{'benchmark':<48} {'value':>12} {'unit':<10} {'baseline':>12} {'ratio':>9}  target")
    for r in rows:
        base = "" if r.get("baseline_value") is None else f"{r['baseline_value']:.4g}"
        ratio = "" if r.get("ratio") is None else f"{r['ratio']:.3g}"
        print(f"{r['name']:<48} {r['value']:>12.4g} {r['unit']:<10} {base:>12} {ratio:>9}  {r.get('target', '')}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
