"""``coefc run FILE IN OUT``: samples in, the bit-true outputs of every channel out.

The input (mono WAV, or ``.txt`` with one raw data word per line) is fed to each
chosen channel; the output is a WAV with one channel per filter channel, or a
``.txt`` with a ``# channels: a b c`` header and one column per channel, one line
per output sample.  A multirate channel's output is written at its output rate
(all chosen channels must end at the same rate).  See
:mod:`coefc.fileio.samples` for the scaling between WAV and data words.
"""

from __future__ import annotations

import sys
from pathlib import Path
from typing import Annotated

import typer

from . import app, options


@app.command()
def run(
    file: Annotated[Path, typer.Argument(metavar="FILE", help="Filter description (.toml).")],
    input_path: Annotated[Path, typer.Argument(metavar="IN", help="Input samples: mono .wav, or .txt with one raw data word per line.")],
    output_path: Annotated[Path, typer.Argument(metavar="OUT", help="Output: .wav (one channel per filter channel) or .txt (one column per channel).")],
    channel: options.Channel = None,
    target: options.Target = None,
    target_dir: options.TargetDirs = None,
    data: options.Data = None,
    coef: options.Coef = None,
    acc: options.Acc = None,
    rounding: options.Rounding = None,
    overflow: options.Overflow = None,
    structure: options.Structure = None,
    scaling: options.Scaling = None,
) -> None:
    """Push samples through the bit-true model of the realised filters.

    Integer WAV full scale maps to the data word's full scale by shifting; float WAV
    in [-1, 1) is rounded by the target's rounding mode and saturated.  Output WAV
    uses the data word's container (16-bit words -> int16, 24/32-bit -> int32,
    float32 -> float).
    """
    from ..fileio.samples import read_samples, write_samples
    from ..fileio.output import check_output
    from ..fileio.samples import output_kind
    from ..simulate import simulate

    output_kind(output_path)
    check_output(output_path, [file, input_path], "output")
    loaded, real = options.realisation(file, channel=channel, target=target, target_dir=target_dir,
                                       data=data, coef=coef, acc=acc, rounding=rounding,
                                       overflow=overflow, structure=structure, scaling=scaling)
    desc = loaded.description
    ar = real.programs[0].arithmetic
    x = read_samples(input_path, ar, desc.sample_rate_hz)
    outputs, overflowed = {}, []
    for prog in real.programs:
        for note in prog.notes:  # say so when the program is not what the design meant
            if getattr(note, "departs_from_design", False):
                print(f"coefc: warning: channel '{prog.name}': {note} (coefc check shows what this costs)",
                      file=sys.stderr)
        t = simulate(prog, x, trace=True)
        outputs[prog.name] = t.y
        n_ovf = sum(t.overflow_counts)
        if n_ovf:
            overflowed.append(f"{prog.name} ({n_ovf} overflowed samples)")
    rates = {p.name: p.output_rate_hz for p in real.programs}
    if len(set(rates.values())) > 1:  # one file holds one rate
        from ..errors import DataError

        raise DataError(f"{output_path}: the channels end at different rates ("
                        + ", ".join(f"{n} {r:g} Hz" for n, r in rates.items())
                        + "); one output file holds one rate: choose the channels of one rate with --channel")
    out_rate = next(iter(rates.values()))
    write_samples(output_path, outputs, ar, out_rate)
    arith = "float32" if ar.is_float else f"data {ar.data}, coef {ar.coef}, acc {ar.acc_bits} bits"
    n_out = len(next(iter(outputs.values())))
    if out_rate != desc.sample_rate_hz:
        sys.stdout.write(f"{output_path}: {len(x)} samples at {desc.sample_rate_hz:g} Hz in, {n_out} samples at "
                         f"{out_rate:g} Hz out\n")
    sys.stdout.write(f"{output_path}: {len(x)} samples x {len(outputs)} channel(s) "
                     f"({', '.join(outputs)}) on target {real.target.name} ({arith}, {ar.structure})\n")
    if overflowed:
        print("coefc: caution: overflow in " + "; ".join(overflowed) + f" ({ar.overflow}). A filter that "
              "overflows can drive an amplifier or actuator to full scale and damage drivers, hearing or "
              "machines; check headroom and follow the standards and sign-off practice of your product.",
              file=sys.stderr)
