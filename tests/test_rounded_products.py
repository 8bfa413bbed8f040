"""Targets that round every product ([arithmetic] product_shift, the built-in mcu32hw):
what the target states, the verdicts that rest on it, and the bundled examples on it."""

from __future__ import annotations

import json
import math
import subprocess
import sys

import numpy as np
import pytest

from coefc.analyse.limitcycles import analyse_limit_cycles
from coefc.analyse.overflow import worst_case_input
from coefc.api import load
from coefc.errors import TargetError
from coefc.program import Arithmetic, ChannelProgram, SectionOp
from coefc.qformat import QFormat
from coefc.simulate import simulate
from coefc.targetspec import find_target

from conftest import FILTERS

MAIN = "from coefc.cli import main; main()"


def test_mcu32hw_states_its_products():
    a = find_target("mcu32hw").arithmetic
    assert (str(a.data), str(a.coef), a.acc_bits) == ("Q1.27", "Q2.30", 32)
    assert (a.product_shift, a.product_rounding) == (29, "add-half")
    assert a.as_dict()["product_shift"] == 29
    # the default stays exact products, and the JSON of such a target is unchanged
    assert "product_shift" not in find_target("mcu32").arithmetic.as_dict()


def test_listed_by_coefc_targets():
    r = subprocess.run([sys.executable, "-c", MAIN, "targets", "--json", "-"], capture_output=True, text=True,
                       timeout=120)
    rows = {t["name"]: t for t in json.loads(r.stdout)["targets"]}
    assert rows["mcu32hw"]["arithmetic"]["product_shift"] == 29


@pytest.mark.parametrize("value", [-1, 30, "29"])
def test_a_product_shift_the_map_cannot_use_is_refused(tmp_path, value):
    board = tmp_path / "board"
    board.mkdir()
    text = (FILTERS.parent / "targets" / "mcu32hw" / "target.toml").read_text()
    (board / "target.toml").write_text(text.replace("product_shift = 29", f"product_shift = {json.dumps(value)}"))
    with pytest.raises(TargetError, match="product_shift"):
        find_target("board", [tmp_path])


def _resonator(structure: str) -> ChannelProgram:
    ar = find_target("mcu32hw").arithmetic.with_(structure=structure)
    r, t = 0.97, 0.2
    op = SectionOp(b=(round(0.02 * 2 ** 30), 0, 0), a=(round(-2 * r * math.cos(t) * 2 ** 30), round(r * r * 2 ** 30)),
                   shift=0, structure=structure)
    return ChannelProgram("r", 48000.0, ar, (op,))


@pytest.mark.parametrize("structure", ["df1", "tdf2", "df1ef"])
def test_limit_cycle_verdicts_say_unproven_and_why(structure):
    # the bounds and searches cover the zero-input map with exact products only: no "none"
    lc = analyse_limit_cycles(_resonator(structure))
    (s,) = lc.sections
    assert s.status == "unproven" and s.overflow_status == "unproven"
    assert "product_shift" in s.note and "product_shift" in s.overflow_note


@pytest.mark.parametrize("structure", ["df1", "tdf2", "df1ef"])
def test_roundoff_bound_covers_the_rounded_products(structure):
    """The l1 argument with the products' worst case: drive the worst-case input (the sign
    pattern of the time-reversed impulse response, Jackson 1970's l1 case) through the
    bit-true engine and stay within the stated bound, which has a term for the products."""
    from coefc.analyse.linear import op_models, response_length
    from coefc.analyse.overflow import roundoff_bound_lsb

    p = _resonator(structure)
    models = op_models(p)
    n = response_length(models)
    bound_lsb = roundoff_bound_lsb(models, n, p.arithmetic.rounding)
    from coefc.analyse.linear import node_impulses

    h = node_impulses(models, n)[-1]
    peak = int(p.arithmetic.data.max_int * 0.9 / float(np.sum(np.abs(h))))
    x = worst_case_input(h, peak, -peak)
    y = simulate(p, x)
    exact = np.convolve(x.astype(float), h)[: len(x)]
    err = float(np.max(np.abs(y - exact)))
    assert err <= bound_lsb
    # three rounded products (b0, a1, a2) of at most 1/2 unit each, a unit being 2^-1 LSB
    assert sum(m.product_bound for m in models) == pytest.approx(3 * 0.5 * 0.5)


@pytest.mark.parametrize("name", ["decimator_192k.toml", "decimator_88k2.toml"])
def test_fir_examples_pass_their_budget_on_mcu32hw(name, tmp_path):
    # The decimators' anti-alias FIRs at the input rate (a rate change needs exact products, so the
    # decimate stage and its alias budget are left out): each tap's rounded product adds one
    # independent error, the l1 bound counts all of them, and every check still passes
    text = "\n".join(line for line in (FILTERS / name).read_text().splitlines()
                     if '"decimate"' not in line and not line.startswith("alias_attenuation_db"))
    (tmp_path / name).write_text(text + "\n")
    r = subprocess.run([sys.executable, "-c", MAIN, "check", str(tmp_path / name), "--target", "mcu32hw"],
                       capture_output=True, text=True, timeout=600)
    assert r.returncode == 0, r.stdout[-2000:] + r.stderr[-2000:]
    # the decimating example itself is refused there in one line (exit 2), never passed
    r = subprocess.run([sys.executable, "-c", MAIN, "check", str(FILTERS / name), "--target", "mcu32hw"],
                       capture_output=True, text=True, timeout=600)
    assert r.returncode == 2 and "rounded products" in r.stderr and r.stderr.count("\n") == 1


def test_iir_example_on_mcu32hw_is_not_passed_on_an_unproven_argument():
    # the weighting filters' limit-cycle verdicts cannot be proven with rounded products:
    # the check fails (exit 1) and names the reason rather than passing
    r = subprocess.run([sys.executable, "-c", MAIN, "check", str(FILTERS / "sound_level_meter.toml"),
                        "--target", "mcu32hw"], capture_output=True, text=True, timeout=600)
    assert r.returncode == 1
    assert "limit_cycles" in r.stdout and "unproven" in r.stdout


def test_realisation_keeps_the_final_shift_non_negative():
    real = load(FILTERS / "three_way_monitor.toml").design().realise(find_target("mcu32hw"))
    for prog in real.programs:
        for op in prog.ops:
            if hasattr(op, "shift"):
                assert prog.arithmetic.final_shift(op.shift) >= 0
