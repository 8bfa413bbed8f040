"""``coefc sweep FILE``: word-length ranges in, a trade-off table (and plot) out.

Exit codes: 0 when at least one configuration passes the budget (or, with
``--fewest-bits``, every channel found passing widths), 1 when none does, 2 bad input.
"""

from __future__ import annotations

import csv
import io
import sys
from pathlib import Path
from typing import Annotated, Optional

import typer

from . import app, options
from .check_cmd import LimitCycles, MaxDeviation, MaxNoise, MinStopband, OverflowBudget

Widths = "Word lengths in bits: LO:HI, LO:HI:STEP or W1,W2,..."


@app.command()
def sweep(
    file: Annotated[Path, typer.Argument(metavar="FILE", help="Filter description (.toml).")],
    target: Annotated[Optional[str], typer.Option("--target", metavar="T1,T2", help="Target name(s), comma separated.")] = None,
    target_dir: options.TargetDirs = None,
    data: Annotated[Optional[str], typer.Option("--data", metavar="WIDTHS", help=f"Data word lengths. {Widths} (default: up to 16 bits below the widest the target's kernel computes, step 4).")] = None,
    coef: Annotated[Optional[str], typer.Option("--coef", metavar="WIDTHS", help=f"Coefficient word lengths. {Widths} (default: as for --data, within the kernel's limit).")] = None,
    acc: Annotated[Optional[str], typer.Option("--acc", metavar="WIDTHS", help=f"Accumulator widths. {Widths} (default: the target's).")] = None,
    structure: Annotated[Optional[str], typer.Option("--structure", metavar="S1,S2", help="Structure(s), comma separated: df1, tdf2, df1ef.")] = None,
    rounding: options.Rounding = None,
    overflow: options.Overflow = None,
    scaling: options.Scaling = None,
    channel: options.Channel = None,
    fewest: Annotated[bool, typer.Option("--fewest-bits", help="Find the smallest passing widths per channel: the grid's minimum, cheapest points first.")] = False,
    per_op: Annotated[bool, typer.Option("--per-op", help="With --fewest-bits: also the smallest coefficient width of each section, FIR (also polyphase) and gain.")] = False,
    measure_noise: Annotated[bool, typer.Option("--measure-noise", help="Also measure noise with the bit-true engine (slower).")] = False,
    jobs: Annotated[Optional[int], typer.Option("--jobs", "-j", metavar="N", min=1, max=256, help="Evaluate configurations in N processes (default: the machine's cores).")] = None,
    json_out: options.JsonOut = None,
    csv_out: Annotated[Optional[str], typer.Option("--csv", metavar="PATH", help="Write one CSV row per configuration and channel to PATH ('-' for stdout).")] = None,
    plot_out: Annotated[Optional[Path], typer.Option("--plot", metavar="OUT.png|OUT.svg", help="Draw each metric against word length to PATH (.png or .svg; needs matplotlib).")] = None,
    max_passband_deviation_db: MaxDeviation = None,
    min_stopband_attenuation_db: MinStopband = None,
    max_noise_dbfs: MaxNoise = None,
    limit_cycles: LimitCycles = None,
    overflow_budget: OverflowBudget = None,
) -> None:
    """Word-length trade-off table; the cheapest passing configuration is marked.

    Cheapest = fewest data plus coefficient bits, ties broken by memory.  Q formats
    keep the target's integer bits (sign bit counted in m).  Noise in dBFS per AES17.
    """
    from ..analyse import AnalysisOptions
    from ..api import load
    from ..budget import apply_overrides
    from ..errors import CoefcError
    from ..explore.opwidths import fewest_op_widths
    from ..explore.sweep import (MAX_SWEEP_POINTS, Sweeper, default_jobs, fewest_bits as run_fewest_bits,
                                 grid_size, parse_names, parse_widths, plot)

    if per_op and not fewest:
        raise CoefcError("--per-op refines --fewest-bits; give both")
    if plot_out is not None and plot_out.suffix.lower() not in (".png", ".svg"):
        raise CoefcError(f"{plot_out}: the plot is written as .png or .svg; choose one of those suffixes")
    if plot_out is not None:
        import importlib.util

        if importlib.util.find_spec("matplotlib") is None:
            raise CoefcError(f"{plot_out}: plotting needs matplotlib: pip install 'coefc[plot]' (or drop --plot)")
    options.check_outputs([(json_out, "JSON report"), (csv_out, "CSV table"), (plot_out, "plot")], [file])
    for text, opt in ((data, "--data"), (coef, "--coef"), (acc, "--acc"), (structure, "--structure"),
                      (target, "--target")):
        if text is not None and not text.replace(",", "").strip():
            raise CoefcError(f"<command line>, key '{opt}': '{text}' names nothing; give a value or leave "
                             f"{opt} out for the default")
    datas = parse_widths(data, "--data")  # None: each target's default widths, inside its kernel's limits
    coefs = parse_widths(coef, "--coef")
    accs = parse_widths(acc, "--acc")
    structures = parse_names(structure)
    targets = parse_names(target) or (None,)
    points = grid_size(targets, structures, accs, datas, coefs)
    if points > MAX_SWEEP_POINTS:
        raise CoefcError(f"<command line>: the sweep would evaluate up to {points} configurations; at most "
                         f"{MAX_SWEEP_POINTS} are accepted (each is a whole check): use a step (16:32:2), fewer "
                         "widths or --fewest-bits")
    loaded = load(file)
    desc = loaded.description
    budget = apply_overrides(desc.budget, passband_deviation_db=max_passband_deviation_db,
                             stopband_attenuation_db=min_stopband_attenuation_db,
                             output_noise_dbfs=max_noise_dbfs, limit_cycles=limit_cycles,
                             overflow=overflow_budget)
    design = loaded.design(channel or None)
    sweeper = Sweeper(design, budget, options.overrides(rounding=rounding, overflow=overflow, scaling=scaling),
                      target_dir or (), AnalysisOptions(measure_noise=measure_noise))
    configs, skipped = sweeper.configs(targets, structures, accs, datas, coefs)
    jobs = jobs or default_jobs()
    if not configs:
        raise CoefcError(f"{file}: no configuration to evaluate ({'; '.join(skipped) or 'empty ranges'})")

    with _progress() as tick:
        if fewest:
            found = []
            groups = sorted({(c.target, c.structure, c.acc_bits) for c in configs})
            total = len(groups) * len(design.channels)
            for gi, (t, st, a) in enumerate(groups):
                for ci, ch in enumerate(design.channels):
                    m = run_fewest_bits(sweeper, ci, ch.name, t, st, a, datas, coefs, jobs)
                    if per_op and m.data_bits is not None:
                        widths = coefs or sweeper.default_widths(t)[1]
                        m.per_op.extend(fewest_op_widths(sweeper, ci, t, st, a, m.data_bits,
                                                           [c for c in widths if c <= m.coef_bits]))
                    found.append(m)
                    tick(gi * len(design.channels) + ci + 1, total)
            result = None
        else:
            result = sweeper.run(configs, skipped, progress=tick, jobs=jobs)

    if fewest:
        if json_out != "-":
            _print_fewest_bits(found)
            for s in skipped:
                print(f"skipped: {s}")
        options.write_json({"source": desc.source, "fewest_bits": [m.to_json() for m in found]}, json_out)
        ok = all(m.data_bits is not None or m.acc_bits is None for m in found)
    else:
        if json_out != "-" and csv_out != "-":
            _print_table(result)
        options.write_json(result.to_json(), json_out)
        if csv_out:
            buf = io.StringIO()
            csv.writer(buf, lineterminator="\n").writerows(result.csv_rows())
            if csv_out == "-":
                sys.stdout.write(buf.getvalue())
            else:
                from ..fileio.output import write_atomic

                write_atomic(Path(csv_out), buf.getvalue())
        if plot_out is not None:
            from ..fileio.output import atomic_path

            with atomic_path(plot_out) as tmp:
                plot(result, tmp)
        ok = result.cheapest() is not None
    if not ok:
        raise typer.Exit(1)


class _progress:
    """Progress on stderr: a bar on a terminal, occasional plain lines otherwise (CI logs).

    After the first evaluation, a run expected to take more than a few seconds is
    announced with a one-line estimate (from that first evaluation's time).
    """

    ESTIMATE_AFTER_S = 5.0  # announce runs expected to take longer
    PLAIN_EVERY_S = 30.0  # a plain progress line at most this often

    def __enter__(self):
        import time

        self._t0 = time.monotonic()
        self._last = self._t0
        self._said = False
        if sys.stderr.isatty():
            from rich.console import Console
            from rich.progress import BarColumn, MofNCompleteColumn, Progress, TimeRemainingColumn

            self._p = Progress("evaluating", BarColumn(), MofNCompleteColumn(), TimeRemainingColumn(),
                               console=Console(stderr=True), transient=True)
            self._p.start()
            self._task = self._p.add_task("sweep", total=None)

        def tick(done, total):
            now = time.monotonic()
            if done == 1 and not self._said and total > 1:
                eta = (now - self._t0) * (total - 1)
                if eta > self.ESTIMATE_AFTER_S:
                    self._said = True
                    self._say(f"coefc: sweep: {total} evaluations, about {eta:.0f} s more "
                              f"(the first took {now - self._t0:.1f} s)")
            if hasattr(self, "_p"):
                self._p.update(self._task, completed=done, total=total)
            elif now - self._last >= self.PLAIN_EVERY_S and done < total:
                self._last = now
                self._say(f"coefc: sweep: {done} of {total} evaluated, {now - self._t0:.0f} s")

        return tick

    def _say(self, line: str) -> None:
        if hasattr(self, "_p"):
            self._p.console.print(line)
        else:
            print(line, file=sys.stderr, flush=True)

    def __exit__(self, *exc):
        if hasattr(self, "_p"):
            self._p.stop()
        return False


def _fmt(v, spec=".3g") -> str:
    if v is None:
        return "-"
    return format(v, spec)


_SHORT = {"passband_deviation_db": "passband", "stopband_attenuation_db": "stopband",
          "output_noise_dbfs": "noise", "limit_cycles": "limit-cycles", "overflow": "overflow",
          "stable": "stability"}


def _print_table(result) -> None:
    from rich.console import Console
    from rich.table import Table

    best = result.cheapest()
    con = Console(highlight=False, soft_wrap=False, width=max(170, Console().width))
    t = Table(title=f"coefc sweep {result.source}", title_justify="left")
    for col, just in (("target", "left"), ("struct", "left"), ("acc", "right"), ("data", "right"),
                      ("coef", "right"), ("passband dev dB", "right"), ("stopband dB", "right"),
                      ("noise dBFS", "right"), ("headroom bits", "right"), ("limit cycles", "left"),
                      ("memory B", "right")):
        t.add_column(col, justify=just)
    t.add_column("verdict", justify="left", no_wrap=True)
    for r in result.results:
        c = r.config
        lcs = sorted({ch.metrics.get("limit_cycle") or "-" for ch in r.channels})
        failing = sorted({_SHORT.get(f, f) for ch in r.channels for f in ch.failing})
        verdict = "pass" if r.ok else "fail: " + ",".join(failing)
        if best is not None and r is best:
            verdict += "  <- cheapest"
        t.add_row(c.target, c.structure, _fmt(c.acc_bits, "d"), _fmt(c.data_bits, "d"), _fmt(c.coef_bits, "d"),
                  _fmt(r.worst("passband_deviation_db")), _fmt(r.worst("stopband_attenuation_db"), ".1f"),
                  _fmt(r.worst("output_noise_dbfs"), ".1f"), _fmt(r.worst("headroom_bits"), ".2f"),
                  "/".join(lcs), str(r.memory_bytes), verdict,
                  style=None if r.ok else "dim")
    con.print(t)
    print("Metrics are the worst over the channels (per-channel rows: --json or --csv); "
          "noise in dBFS per AES17 (0 dBFS = RMS of a full-scale sine).")
    for s in result.skipped:
        print(f"skipped: {s}")
    if best is None:
        print("no configuration passes the budget")
    else:
        print(f"cheapest passing configuration: {best.config.label()} "
              f"({best.bits} data+coef bits, {best.memory_bytes} bytes)")
    for name, r in result.cheapest_per_channel().items():
        print(f"  channel {name}: " + ("no passing configuration" if r is None else r.config.label()))


def _print_fewest_bits(found) -> None:
    for m in found:
        head = f"channel {m.channel} on {m.target} {m.structure}" + (f" acc {m.acc_bits}" if m.acc_bits else "")
        if m.acc_bits is None and m.data_bits is None:
            print(f"{head}: float32 target, no word lengths to choose")
            continue
        refused = f"; {m.refused} refused by the kernel, not offered" if m.refused else ""
        if m.data_bits is None:
            print(f"{head}: no passing widths in the ranges given (all {m.grid} grid points evaluated{refused})")
        else:
            print(f"{head}: smallest passing data {m.data_bits} bits, coef {m.coef_bits} bits "
                  f"({m.evaluated} of {m.grid} grid points evaluated, every cheaper one fails{refused})")
        for w in m.per_op:
            bits = "no width in range passes" if w.coef_bits is None else f"{w.coef_bits}-bit coefficients"
            print(f"  op {w.op} ({w.kind}): {bits}" + (f"  [{w.note}]" if w.note else ""))
