"""``coefc targets``: the visible targets (built-in and user folders) and their arithmetic."""

from __future__ import annotations

import sys

from . import app, options


def _row(t) -> dict:
    a = t.arithmetic
    row = {"name": t.name, "folder": str(t.folder), "summary": t.summary, "arithmetic": a.as_dict(),
           "structures": list(t.structures)}
    if a.is_float:
        for key in ("data", "coef", "acc_bits", "rounding", "overflow"):
            row["arithmetic"][key] = None
    build = t.raw.get("kernel")
    row["kernel"] = dict(build) if isinstance(build, dict) else None
    return row


@app.command()
def targets(target_dir: options.TargetDirs = None, json_out: options.JsonOut = None) -> None:
    """List targets and their arithmetic (built-in, --target-dir, COEFC_TARGET_PATH)."""
    from ..targetspec import build_info, list_targets

    options.check_outputs([(json_out, "JSON report")])
    found = list_targets(target_dir or ())
    for t in found:  # a target that could not build a header is bad input here too
        if "kernel" in t.raw:
            build_info(t)
    if json_out:
        options.write_json({"schema": 1, "targets": [_row(t) for t in found]}, json_out)
        if json_out == "-":
            return
    for t in found:
        a = t.arithmetic
        if a.is_float:
            arith = "float32 (IEEE 754 single, no fused multiply-add)"
        else:
            arith = (f"data {a.data}, coef {a.coef}, acc {a.acc_bits} bits, rounding {a.rounding}, "
                     f"overflow {a.overflow}")
            if a.product_shift:
                arith += f", products rounded by 2^{a.product_shift} ({a.product_rounding})"
        sys.stdout.write(f"{t.name:<10} {arith}\n{'':<10} structures {', '.join(t.structures)} "
                         f"(default {a.structure}), scaling {a.scaling}\n{'':<10} {t.summary}\n"
                         f"{'':<10} {t.folder}\n")
