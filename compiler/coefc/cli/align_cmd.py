"""``coefc align IR1.wav IR2.wav ...``: arrival and band level of each way, and the stages that align them.

Prints, for each impulse response, its arrival relative to the first one and its
level over a band, then the ``delay`` (sub-sample, Thiran all-pass) and ``gain``
stages that bring every way to the latest arrival and the quietest level.
``--json PATH`` (``-`` for stdout) writes the same as JSON.
"""

from __future__ import annotations

import sys
from typing import Annotated, List, Optional

import typer

from ..errors import DescriptionError
from . import app, options

Band = Annotated[Optional[str], typer.Option("--band", metavar="LO,HI",
                                             help="Band of the level comparison in Hz (default 100,10000).")]


def _band(text: str | None):
    if text is None:
        return None
    try:
        lo, hi = (float(v) for v in text.split(","))
    except ValueError:
        raise DescriptionError("<command line>", f"'{text}' is not a band; write two frequencies in Hz, e.g. "
                               "--band 200,2000", key="--band") from None
    return lo, hi


def _stage_text(row: dict) -> str:
    parts = []
    if row["delay_samples"] > 0:
        parts.append(f'{{ kind = "delay", ms = {row["delay_ms"]:.5f}, interpolation = "thiran" }}')
    if abs(row["gain_db"]) >= 0.005:
        parts.append(f'{{ kind = "gain", db = {row["gain_db"]:.2f}'
                     + (", invert = true" if row["inverted"] else "") + " }")
    elif row["inverted"]:
        parts.append('{ kind = "gain", invert = true }')
    return ", ".join(parts) if parts else "(nothing: this way arrives last and is the quietest)"


@app.command()
def align(
    files: Annotated[List[str], typer.Argument(help="Impulse responses (mono WAV), the first is the reference.",
                                               metavar="IR.wav...", show_default=False)],
    band: Band = None,
    json_out: options.JsonOut = None,
) -> None:
    """Arrival and level of each way's impulse response, and the delay and gain stages that align them."""
    from ..design.alignment import align as run_align
    from ..design.alignment import alignment_stages

    options.check_outputs([(json_out, "JSON report")], files)
    fs, arrivals = run_align(files, _band(band))
    rows = alignment_stages(fs, arrivals)
    if json_out is not None:
        options.write_json({"sample_rate_hz": fs, "ways": rows}, json_out)
        if json_out == "-":
            return
    out = [f"{len(rows)} impulse responses at {fs:g} Hz; arrival relative to {files[0]}, level over the band"]
    for r in rows:
        out.append(f"  {r['path']}: arrival {r['arrival_samples']:+.3f} samples, level {r['level_db']:.2f} dB"
                   + (", polarity inverted" if r["inverted"] else ""))
    out.append("stages that align them (delay to the latest arrival, gain to the quietest level):")
    for r in rows:
        out.append(f"  {r['path']}: {_stage_text(r)}")
    sys.stdout.write("\n".join(out) + "\n")
