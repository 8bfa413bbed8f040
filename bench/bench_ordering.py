"""Section pairing and ordering against scipy's zpk2sos(pairing='nearest').

For every multi-section channel of the example descriptions and every scaling
norm, prints the analytic output roundoff noise (dB relative to one rounding,
q^2/12) of: coefc's order, scipy.signal.zpk2sos(pairing='nearest') in its own
order, and the best and worst of all orderings (brute force, up to 6 sections),
all scaled by the same norm with the same FIR and gain blocks around them.

Run:  python bench/bench_ordering.py [FILE ...]
"""

from __future__ import annotations

import glob
import itertools
import sys
from pathlib import Path

import numpy as np
from scipy import signal


def main() -> None:
    import coefc
    from coefc.blocks import RateBlock
    from coefc.realise import _gather, pairing

    files = sys.argv[1:] or sorted(glob.glob(str(Path(__file__).resolve().parent.parent / "filters" / "*.toml")))
    db = lambda v: 10 * np.log10(v / (1 / 12))  # noqa: E731
    print(f"{'channel':28s} {'norm':5s} {'coefc':>7s} {'scipy':>7s} {'best':>7s} {'worst':>7s}  (dB re q^2/12)")
    gains = []
    for f in files:
        for ch in coefc.load(f).design().channels:
            if any(isinstance(b, RateBlock) for b in ch.blocks):
                continue  # multirate channels are realised stage by stage (no one cascade to order)
            gain, _, pre, rows, post = _gather(ch)
            if len(rows) < 2:
                continue
            rows = np.asarray(rows)
            rep, k0 = pairing.repair(rows)
            for norm in ("l1", "l2", "linf"):
                target = 1 - 2 * 2.0 ** -31
                _, noise = pairing.order_sections(pre, rep, post, norm, target, "df1", k0 * gain)
                mine = noise["exchanged"]
                z, p, k = signal.sos2zpk(rows)
                base = signal.zpk2sos(z, p, k, pairing="nearest")
                b_secs = [(r[:3] / r[0], r[3:]) for r in base]
                ref = pairing.chain_noise(pre, b_secs, post, norm, target, "df1", float(np.prod(base[:, 0])) * gain)
                if len(rep) <= 6:
                    allp = [pairing.chain_noise(pre, list(o), post, norm, target, "df1", k0 * gain)
                            for o in itertools.permutations(rep)]
                    best, worst = f"{db(min(allp)):7.2f}", f"{db(max(allp)):7.2f}"
                else:
                    best = worst = "    n/a"
                gains.append(db(ref) - db(mine))
                print(f"{Path(f).stem + ':' + ch.name:28s} {norm:5s} {db(mine):7.2f} {db(ref):7.2f} {best} {worst}")
    if gains:
        print(f"coefc quieter than scipy's pairing by {min(gains):.2f} .. {max(gains):.2f} dB "
              f"(median {np.median(gains):.2f} dB) over {len(gains)} cases")


if __name__ == "__main__":
    main()
