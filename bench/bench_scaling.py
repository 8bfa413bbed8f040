"""Speed of ``coefc check`` on large channels, and how it grows with the section count.

Three measurements, each in fresh processes, against ``python -c "import scipy.signal"``
timed in the same run (interleaved, medians):

1. one channel of 14 cookbook ``peaking`` stages at spread frequencies (a 14-band
   equaliser), 48 kHz, on mcu32;
2. one 32nd-order elliptic low-pass (16 sections), 48 kHz, on mcu32;
3. peaking-equaliser channels of 2, 4, 8, 16 and 32 sections: the check time
   against the section count, with the growth exponent fitted by least squares on
   log-log axes, both of the whole time and of the time beyond the scipy import
   (the work itself).

Goals (issue 17): 1 and 2 at most 3x the scipy.signal import; the growth at most
linear (exponent <= 1).  The descriptions are written to a temporary folder.

Usage: python bench/bench_scaling.py [--repeat N] [--target mcu32]
"""

from __future__ import annotations

import argparse
import math
import statistics
import sys
import tempfile
from pathlib import Path

import numpy as np

from bench_check import wall  # one wall clock for the benches

GOAL_RATIO = 3.0
GOAL_EXPONENT = 1.0




def eq_toml(bands: int, target: str) -> str:
    """One channel of *bands* peaking stages, log-spaced 25 Hz .. 18 kHz, alternating boost and cut."""
    f = np.geomspace(25.0, 18000.0, bands) if bands > 1 else [1000.0]
    stages = []
    for i, fi in enumerate(f):
        g = (3.0 + 3.0 * ((i * 7) % 5) / 4.0) * (1 if i % 2 == 0 else -1)
        q = 1.0 + 0.25 * (i % 4)
        stages.append(f'  {{ kind = "peaking", freq_hz = {fi:.1f}, q = {q:g}, gain_db = {g:+.2f} }},')
    return (f'name = "eq{bands}"\nsample_rate_hz = 48000\n\n[implementation]\ntarget = "{target}"\n'
            'scaling = "l1"\n\n[[channel]]\nname = "eq"\nstages = [\n' + "\n".join(stages) + "\n]\n")


def elliptic_toml(order: int, target: str) -> str:
    return (f'name = "ell{order}"\nsample_rate_hz = 48000\n\n[implementation]\ntarget = "{target}"\n'
            'scaling = "l1"\n\n[[channel]]\nname = "lp"\nstages = [\n'
            f'  {{ kind = "lowpass", response = "elliptic", order = {order}, cutoff_hz = 8000, ripple_db = 0.1, '
            'attenuation_db = 80 },\n]\n')


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--target", default="mcu32")
    ap.add_argument("--sections", default="2,4,8,16,32", help="section counts of the growth fit")
    args = ap.parse_args()
    counts = [int(v) for v in args.sections.split(",")]
    tmp = Path(tempfile.mkdtemp(prefix="coefc_bench_scaling_"))
    files = {"eq14": tmp / "eq14.toml", "ell32": tmp / "ell32.toml"}
    files["eq14"].write_text(eq_toml(14, args.target))
    files["ell32"].write_text(elliptic_toml(32, args.target))
    for n in counts:
        files[f"eq{n}"] = tmp / f"eq{n}.toml"
        files[f"eq{n}"].write_text(eq_toml(n, args.target))

    base_cmd = [sys.executable, "-c", "import scipy.signal"]

    def check(name: str) -> list[str]:
        return [sys.executable, "-c", "from coefc.cli import main; main()", "check", str(files[name])]

    wall(base_cmd)  # warm the file cache
    times: dict[str, list[float]] = {"base": []}
    names = ["eq14", "ell32"] + [f"eq{n}" for n in counts if f"eq{n}" != "eq14"]
    for _ in range(args.repeat):  # interleaved, so load changes hit all alike
        times["base"].append(wall(base_cmd))
        for name in names:
            times.setdefault(name, []).append(wall(check(name)))
    med = {k: statistics.median(v) for k, v in times.items()}
    b = med["base"]
    print(f"target {args.target}, medians of {args.repeat} runs")
    print(f"import scipy.signal            : {b:8.2f} s")
    for name, label in (("eq14", "14-band peaking EQ channel"), ("ell32", "32nd-order elliptic low-pass")):
        r = med[name] / b
        print(f"check {label:<25}: {med[name]:8.2f} s  {r:7.2f}x  (goal <= {GOAL_RATIO:g}x) "
              f"{'ok' if r <= GOAL_RATIO else 'OVER GOAL'}")
    print("sections   check [s]   beyond import [s]")
    xs, ys, ws = [], [], []
    for n in counts:
        t = med[f"eq{n}"]
        print(f"{n:8d}   {t:9.2f}   {t - b:17.2f}")
        xs.append(math.log(n))
        ys.append(math.log(t))
        ws.append(math.log(max(t - b, 1e-3)))
    p = np.polyfit(xs, ys, 1)[0]
    q = np.polyfit(xs, ws, 1)[0]
    print(f"growth exponent, whole check time        : {p:.2f}")
    print(f"growth exponent, time beyond the import  : {q:.2f}  (goal <= {GOAL_EXPONENT:g}) "
          f"{'ok' if q <= GOAL_EXPONENT else 'OVER GOAL'}")


if __name__ == "__main__":
    main()
