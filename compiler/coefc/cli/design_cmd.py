"""``coefc design FILE``: a description in, the float design summary per channel out.

Prints each channel's stages (order, sections, taps), its latency, and magnitude,
phase and group delay at chosen frequencies, plus warnings worth a designer's
attention.  ``--json PATH`` (``-`` for stdout) writes the same as JSON.
"""

from __future__ import annotations

import math
import sys
from typing import Annotated, Optional

import typer

from ..errors import DescriptionError
from . import app, options

Freqs = Annotated[
    Optional[str],
    typer.Option("--freqs", metavar="F1,F2,...", help="Comma-separated frequencies in Hz (default: octave centres below Nyquist)."),
]


def parse_freqs(text: str, fs: float) -> tuple[float, ...]:
    """Parse ``--freqs`` (``"100,1000,1e4"``); each must lie in (0, fs/2]."""
    out = []
    for part in text.split(","):
        part = part.strip()
        if not part:
            continue
        try:
            f = float(part)
        except ValueError:
            raise DescriptionError("<command line>", f"'{part}' is not a frequency; write numbers in Hz "
                                   "separated by commas, e.g. --freqs 100,1000,10000", key="--freqs") from None
        if not math.isfinite(f) or f <= 0 or f > fs / 2:
            raise DescriptionError("<command line>", f"{part} Hz is outside 0..Nyquist (sample_rate_hz={fs:g} "
                                   f"-> {fs / 2:g} Hz); use frequencies above 0 and at most {fs / 2:g} Hz",
                                   key="--freqs")
        out.append(f)
    if not out:
        raise DescriptionError("<command line>", "no frequencies given; write e.g. --freqs 100,1000,10000",
                               key="--freqs")
    return tuple(out)


def _num(v, fmt: str, none: str = "-") -> str:
    return none if v is None else format(v, fmt)


def render_text(desc, summaries: list[dict]) -> str:
    """The human report of ``coefc design``."""
    lines = [f"{desc.name}: {desc.source}, {desc.sample_rate_hz:g} Hz, {len(summaries)} channel"
             + ("s" if len(summaries) != 1 else "")]
    for ch in summaries:
        lines.append("")
        n = len(ch["stages"])
        lines.append(f"channel {ch['name']}: {n} stage{'s' if n != 1 else ''}, {ch['sections']} second-order "
                     f"section{'s' if ch['sections'] != 1 else ''}, {ch['fir_taps']} FIR taps; latency "
                     f"{ch['latency_samples']:g} samples ({ch['latency_ms']:.3f} ms)"
                     + (" plus the IIR group delay below" if ch["sections"] else ""))
        multirate = ch["output_rate_hz"] != ch["sample_rate_hz"]
        if multirate:
            lines.append(f"  rates: input {ch['sample_rate_hz']:g} Hz, output {ch['output_rate_hz']:g} Hz (each "
                         "stage at the rate in brackets; latency and group delay in input samples)")
        for s in ch["stages"]:
            facts = []
            if s["order"]:
                facts.append(f"order {s['order']}")
            if s["sections"]:
                facts.append(f"{s['sections']} section" + ("s" if s["sections"] != 1 else ""))
            if s["taps"]:
                facts.append(f"{s['taps']} taps")
            at = f"[{s['rate_hz']:g} Hz] " if multirate else ""
            lines.append(f"  {s['index']:>2}. {at}{s['text']}" + (f"  [{', '.join(facts)}]" if facts else ""))
            lines.extend(f"      {d}" for d in s.get("details", ()))
        lines.append(f"  {'Hz':>9}  {'magnitude dB':>12}  {'phase deg':>9}  {'group delay (samples)':>21}")
        for r in ch["response"]:
            lines.append(f"  {r['freq_hz']:>9g}  {_num(r['magnitude_db'], '12.3f', '        null'):>12}  "
                         f"{_num(r['phase_deg'], '9.1f'):>9}  {_num(r['group_delay_samples'], '21.2f'):>21}")
        for w in ch["warnings"]:
            lines.append(f"  warning: {w}")
    return "\n".join(lines) + "\n"


@app.command()
def design(
    file: Annotated[str, typer.Argument(help="The filter description (.toml).", metavar="FILE", show_default=False)],
    freqs: Freqs = None,
    json_out: options.JsonOut = None,
    channel: options.Channel = None,
) -> None:
    """Float design summary per channel: stages, latency, magnitude, phase and group delay."""
    from ..api import load
    from ..design.response_table import channel_summary, default_freqs

    options.check_outputs([(json_out, "JSON report")], [file])
    loaded = load(file)
    desc = loaded.description
    fq = parse_freqs(freqs, desc.sample_rate_hz) if freqs is not None else default_freqs(desc.sample_rate_hz)
    designed = loaded.design(channel or None)
    summaries = [channel_summary(ch, fq) for ch in designed.channels]
    if json_out is not None:
        options.write_json({"source": desc.source, "name": desc.name, "sample_rate_hz": desc.sample_rate_hz,
                            "channels": summaries}, json_out)
    if json_out == "-":
        for ch in summaries:
            for w in ch["warnings"]:
                print(f"coefc: warning: channel '{ch['name']}': {w}", file=sys.stderr)
    else:
        sys.stdout.write(render_text(desc, summaries))
