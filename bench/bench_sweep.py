"""Cost of ``coefc sweep`` on the three-way monitor example, relative to one check.

Runs, in fresh processes and in one run of this script, the full ``coefc check`` of
filters/three_way_monitor.toml and a 16 x 16 sweep of its coefficient and data word
lengths (``--coef 17:32 --data 17:32``), and reports the wall times and their ratio.
Goal: the 256-configuration sweep costs at most 8 times one check (it shares the
float design and everything that does not depend on the word lengths, and evaluates
configurations in one process per core: ``--jobs``, default the machine's cores).

Usage: python bench/bench_sweep.py [--repeat N] [--grid LO:HI]
"""

from __future__ import annotations

import argparse
import statistics
import sys
from pathlib import Path

from bench_check import wall  # the same fresh-process wall clock (bench/ is on sys.path)

REPO = Path(__file__).resolve().parent.parent
EXAMPLE = REPO / "filters" / "three_way_monitor.toml"
GOAL = 8.0


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeat", type=int, default=3, help="check runs (median taken)")
    ap.add_argument("--grid", default="17:32", help="word-length range for both axes")
    args = ap.parse_args()
    cli = [sys.executable, "-c", "from coefc.cli import main; main()"]
    check_cmd = cli + ["check", str(EXAMPLE)]
    sweep_cmd = cli + ["sweep", str(EXAMPLE), "--coef", args.grid, "--data", args.grid]
    wall(check_cmd)  # warm caches
    check = statistics.median(wall(check_cmd) for _ in range(args.repeat))
    sweep = wall(sweep_cmd)
    lo, hi = (int(v) for v in args.grid.split(":"))
    n = (hi - lo + 1) ** 2
    ratio = sweep / check
    print(f"coefc check example         : {check:8.2f} s (median of {args.repeat})")
    from coefc.explore.sweep import default_jobs

    print(f"coefc sweep {n:3d} configs     : {sweep:8.2f} s ({sweep / n * 1000:.0f} ms per configuration, "
          f"{default_jobs()} processes)")
    print(f"ratio sweep / check         : {ratio:8.2f}x (goal <= {GOAL:g}x) {'ok' if ratio <= GOAL else 'OVER GOAL'}")


if __name__ == "__main__":
    main()
