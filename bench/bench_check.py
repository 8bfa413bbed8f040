"""Speed of ``coefc check`` on the three-way monitor example, relative to Python startup.

Runs, in fresh processes, ``python -c "import scipy.signal"`` and the full check of
filters/three_way_monitor.toml (all channels, limit-cycle search and measured
noise included) several times each and reports the median wall times and their
ratio.  Goal: the check takes at most 3x the scipy.signal import.

Usage: python bench/bench_check.py [--repeat N]
"""

from __future__ import annotations

import argparse
import statistics
import subprocess
import sys
import time
from pathlib import Path

REPO = Path(__file__).resolve().parent.parent
EXAMPLE = REPO / "filters" / "three_way_monitor.toml"
GOAL = 3.0


def wall(cmd: list[str]) -> float:
    t = time.perf_counter()
    r = subprocess.run(cmd, capture_output=True, text=True)
    dt = time.perf_counter() - t
    if r.returncode not in (0, 1):  # 1 = over budget is still a complete check
        sys.exit(f"command failed ({r.returncode}): {' '.join(cmd)}\n{r.stderr}")
    return dt


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeat", type=int, default=5)
    args = ap.parse_args()
    base_cmd = [sys.executable, "-c", "import scipy.signal"]
    check_cmd = [sys.executable, "-c", "from coefc.cli import main; main()", "check", str(EXAMPLE)]
    wall(base_cmd)  # warm the file cache
    wall(check_cmd)
    base, check = [], []
    for _ in range(args.repeat):  # interleaved, so load changes hit both alike
        base.append(wall(base_cmd))
        check.append(wall(check_cmd))
    b, c = statistics.median(base), statistics.median(check)
    ratio = c / b
    print(f"import scipy.signal : {b * 1000:8.1f} ms (median of {args.repeat})")
    print(f"coefc check example : {c * 1000:8.1f} ms (median of {args.repeat})")
    print(f"ratio               : {ratio:8.2f}x (goal <= {GOAL:g}x) {'ok' if ratio <= GOAL else 'OVER GOAL'}")


if __name__ == "__main__":
    main()
