"""Limit cycles of recursive sections: a ChannelProgram in, per-section verdicts out.

Two phenomena, checked for every recursive second-order (or first-order) section
with its input held at zero:

Granular limit cycles (zero-input, rounding)
    With rounding error ``e`` bounded by ``e_max`` LSB (1/2 for ``add-half`` and
    ``half-even``, 1 for ``toward-zero``; ``truncate`` errors lie in (-1, 0], i.e. 1/2
    around -1/2), any periodic output obeys ``y = h * e`` with ``h`` the impulse
    response of ``1/A(z)`` (or of the section's noise transfer for ``df1ef``), so
    ``|y| <= e_max ||h||_1`` -- a rigorous bound (the linear model with bounded
    error).  The same argument bounds the linear combinations ``y[n-1] - y[n-2]``
    and ``y[n-1] + y[n-2]``; every state inside these bounds is then searched
    exhaustively when there are at most ``max_states`` of them: the zero-input map
    restricted to these states is a function on a finite set, and the compiled core
    visits every state once and marks those on cycles (functional-graph cycle
    detection; numpy reference: map the candidate set until it stops shrinking,
    what remains is exactly the set of states on cycles).  Verdicts:
    ``none`` (proven), ``found`` (period, amplitude in LSB, a starting state that
    reproduces it) or ``unproven`` (the bound; a sampled search may still find
    cycles, reported with ``exhaustive = False``).

Overflow oscillations (zero-input, large states)
    A verdict of ``none`` rests on one of two arguments that cover the whole
    zero-input integer map, rounding and ``fit_data`` included.  (a) No state of
    the data-word box (with every rounding residual, for ``df1ef``) can overflow:
    the largest and smallest accumulator over the box are exact (a linear form is
    extreme at the corners), the rounding is monotone, so their rounded values
    bound every next output; when both fit the data word (and the accumulator
    never wraps) the map is the rounded linear map, whose cycles all lie inside
    the granular bound.  The criterion ``|a1| + |a2| < 1`` (Ebert, Mazo & Taylor
    1969) is the exact-arithmetic form of this test; it misses the quantiser's
    reach, which can lift a sum just below full scale to +full scale, where
    ``wrap`` turns it into -full scale.  (b) Otherwise, when the state space is
    small enough (``MAX_WHOLE_STATES``), every state is visited once and the cycles
    of the whole map are found exactly (compiled core; numpy reference: pointer
    doubling); a cycle that passes
    through an overflow (``fit_data`` or the accumulator changed a value) is an
    overflow oscillation.  Otherwise the verdict is ``unproven`` with the reason,
    and zero-input runs from full-scale corner states and random large states
    may still find one (``found``).  Saturation gets the same treatment: it damps
    the exact-arithmetic overflow oscillations of a second-order direct form, but
    with rounding it need not (Wanhammar, DSP Integrated Circuits, 1999, sec. 5.2:
    "sufficient to suppress the large parasitic overflow oscillation, but not
    completely").

The zero-input recursion of ``df1`` and ``tdf2`` (states kept at accumulator
precision) is ``y[n] = fit_data(round_shift(-A1*y[n-1] - A2*y[n-2], Fc - s))`` with
the accumulator wrapped to ``acc_bits``, as in :mod:`coefc.program`.

References
----------
D. L. Jones, "Limit Cycles", OpenStax CNX module m11928 (first-order dead band,
the wrap-around example 1/(1 - z^-1 + 0.5 z^-2)).
L. B. Jackson, "An analysis of limit cycles due to multiplication rounding in
recursive digital (sub)filters", Proc. 7th Allerton Conf., 1969.
P. M. Ebert, J. E. Mazo, M. G. Taylor, "Overflow oscillations in digital filters",
Bell Syst. Tech. J. 48(9), 1969.
T. A. C. M. Claasen, W. F. G. Mecklenbrauker, J. B. H. Peek, "Effects of
quantization and overflow in recursive digital filters", IEEE Trans. ASSP-24(6), 1976.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace
from typing import Literal

import numpy as np

from ..program import STRUCTURE_TABLE, Arithmetic, ChannelProgram, SectionOp, lo_bits
from ..qformat import fit_word, round_shift

MAX_STATES = 1 << 24  # exhaustive granular search up to this many candidate states (compiled: ~0.5 s at the limit)
MAX_WHOLE_STATES = 1 << 22  # exhaustive search of the whole zero-input map up to this many states


#: a verdict: "none" proven over the whole integer map, "found" a cycle exists (start state
#: given), "unproven" neither could be shown (the note says why)
Status = Literal["none", "found", "unproven"]


@dataclass(frozen=True)
class Cycle:
    """One zero-input cycle: its largest output word, its period and a state on it."""

    amplitude_lsb: int
    period: int
    start_state: tuple[int, ...]  # (y[n-1], y[n-2]) data words; df1ef adds the residual E


@dataclass(frozen=True)
class GranularVerdict:
    """Granular limit cycles of one section (cycles that never overflow)."""

    status: Status
    bound_lsb: float | None  # rigorous amplitude bound (None: no finite bound)
    exhaustive: bool
    states_searched: int
    cycle: Cycle | None = None  # the largest cycle found (``found``, or a sampled hit when ``unproven``)
    note: str = ""
    search_limited: bool = False  # unproven because the candidate states exceeded the search limit


@dataclass(frozen=True)
class OverflowVerdict:
    """Overflow oscillations of one section (zero-input cycles through an overflow)."""

    status: Status
    note: str
    amplitude: float | None = None  # fraction of full scale
    period: int | None = None
    start: tuple[int, ...] | None = None


@dataclass(frozen=True)
class AtOutput:
    """A section's cycle carried through the rest of the channel."""

    amplitude_lsb: int | None = None  # bit-true engine, the found cycle fed to the later ops
    bound_lsb: float | None = None  # rigorous bound at the channel output (None: no finite bound)
    note: str = ""


@dataclass(frozen=True)
class WholeSpace:
    """Every cycle of a zero-input map over its whole state space: the largest of each kind."""

    states: int
    granular: Cycle | None
    overflow: Cycle | None


@dataclass(frozen=True)
class SectionLimitCycles:
    """Verdicts for one recursive section (``op_index`` 0-based).

    The three records are made by separate arguments (granular bound and search,
    overflow reach and runs, the rest of the channel); the read-only properties give
    their fields by the flat names the budget and the reports use.
    """

    op_index: int
    granular: GranularVerdict
    overflow: OverflowVerdict
    at_output: AtOutput | None = None  # filled in by analyse_limit_cycles

    status = property(lambda self: self.granular.status)
    bound_lsb = property(lambda self: self.granular.bound_lsb)
    exhaustive = property(lambda self: self.granular.exhaustive)
    states_searched = property(lambda self: self.granular.states_searched)
    note = property(lambda self: self.granular.note)
    search_limited = property(lambda self: self.granular.search_limited)
    amplitude_lsb = property(lambda self: self.granular.cycle.amplitude_lsb if self.granular.cycle else None)
    period = property(lambda self: self.granular.cycle.period if self.granular.cycle else None)
    start_state = property(lambda self: self.granular.cycle.start_state if self.granular.cycle else None)
    overflow_status = property(lambda self: self.overflow.status)
    overflow_note = property(lambda self: self.overflow.note)
    overflow_amplitude = property(lambda self: self.overflow.amplitude)
    overflow_period = property(lambda self: self.overflow.period)
    overflow_start = property(lambda self: self.overflow.start)
    output_amplitude_lsb = property(lambda self: self.at_output.amplitude_lsb if self.at_output else None)
    output_bound_lsb = property(lambda self: self.at_output.bound_lsb if self.at_output else None)
    output_note = property(lambda self: self.at_output.note if self.at_output else "")


_NO_BOUND = ("no amplitude bound: the realised section is not stable, or its poles lie too close to the unit "
             "circle to sum the bound rigorously")
_NO_ROUNDING = "the loop does not round (shift >= coefficient fraction bits)"

_WORST = {"none": 0, "found": 1, "unproven": 2}


@dataclass(frozen=True)
class LimitCycleAnalysis:
    """Per-section verdicts and the channel's summary (the worst section decides).

    Amplitudes of the summary are at the channel output: the cycle found in a
    section is fed through the rest of the channel by the bit-true engine
    (``SectionLimitCycles.output_amplitude_lsb``); bounds are carried by the rest's
    l1 gain plus its own roundoff (``output_bound_lsb``).
    """

    sections: tuple[SectionLimitCycles, ...] = field(default_factory=tuple)
    section_numbers: tuple[int, ...] = field(default_factory=tuple)  # 1-based, among the channel's sections

    @property
    def status(self) -> Status:
        """``unproven`` if any section is, else ``found`` if any is, else ``none``."""
        return max((s.status for s in self.sections), key=_WORST.get, default="none")

    def _largest(self):
        found = [s for s in self.sections if s.amplitude_lsb]
        return max(found, key=lambda s: (_out_amp(s), s.amplitude_lsb)) if found else None

    @property
    def amplitude_lsb(self) -> int | None:
        """Largest found cycle at the channel output (0 when proven absent, None when none found)."""
        if self.status == "none":
            return 0
        s = self._largest()
        return _out_amp(s) if s else None

    @property
    def section_amplitude_lsb(self) -> int | None:
        s = self._largest()
        return s.amplitude_lsb if s else (0 if self.status == "none" else None)

    @property
    def section(self) -> int | None:
        """1-based op index of the section where the largest output cycle arises."""
        s = self._largest()
        return s.op_index + 1 if s else None

    @property
    def period(self) -> int | None:
        s = self._largest()
        return s.period if s else None

    @property
    def bound_lsb(self) -> float | None:
        """Largest rigorous amplitude bound at the channel output (None: some section has none)."""
        b = [s.output_bound_lsb if s.output_bound_lsb is not None or s.bound_lsb is None else s.bound_lsb
             for s in self.sections]
        if any(v is None for v in b):
            return None
        return max(b) if b else 0.0

    @property
    def complete(self) -> bool:
        """Every section was searched exhaustively (found amplitudes are the largest)."""
        return all(s.exhaustive for s in self.sections)

    @property
    def overflow_status(self) -> Status:
        st = [s.overflow_status for s in self.sections]
        return "found" if "found" in st else "unproven" if "unproven" in st else "none"

    def label(self, s: SectionLimitCycles) -> str:
        i = self.sections.index(s)
        n = self.section_numbers[i] if i < len(self.section_numbers) else None
        return f"section {n} (op {s.op_index + 1})" if n is not None and n != s.op_index + 1 else \
            f"section {s.op_index + 1}"

    def summary(self) -> str:
        """Every section that is not proven free, e.g. ``found, 1 LSB at the output in section 1; ...``."""
        parts = []
        for s in sorted(self.sections, key=lambda s: (-_WORST[s.status], -(_out_amp(s) or 0))):
            if s.status == "none":
                continue
            where = self.label(s)
            if s.status == "found":
                parts.append(f"found in {where}: {_out_amp(s)} LSB at the channel output, {s.amplitude_lsb} LSB "
                             f"at the section, period {s.period}"
                             + ("" if s.exhaustive else " (sampled search; larger cycles may exist)"))
            else:
                ob = s.output_bound_lsb if s.output_bound_lsb is not None else s.bound_lsb
                parts.append(f"{where} unproven, " + (f"bound {ob:.6g} LSB at the channel output" if ob is not None
                                                      else "no amplitude bound")
                             + (f", a sampled search found {_out_amp(s)} LSB" if s.amplitude_lsb else ""))
        return "; ".join(parts) if parts else "none in any section"


def _out_amp(s: SectionLimitCycles) -> int | None:
    if s.amplitude_lsb is None:
        return None
    return s.output_amplitude_lsb if s.output_amplitude_lsb is not None else s.amplitude_lsb


# ---------------------------------------------------------------- the integer map

def zero_input_step(y1, y2, a1: int, a2: int, k: int, arith: Arithmetic):
    """One zero-input step of the df1/tdf2 recursion on arrays of states (exact integers)."""
    if arith.acc_bits > 64:
        y1 = np.asarray([int(v) for v in np.ravel(y1)], dtype=object)
        y2 = np.asarray([int(v) for v in np.ravel(y2)], dtype=object)
        acc = -(int(a1) * y1) - (int(a2) * y2)
    else:
        acc = -(np.int64(a1) * y1) - (np.int64(a2) * y2)
    if arith.acc_bits < 64:
        acc = fit_word(acc, arith.acc_bits, "wrap")
    elif arith.acc_bits > 64:
        acc = np.asarray([fit_word(int(v), arith.acc_bits, "wrap") for v in acc], dtype=object)
    if arith.acc_bits > 64:
        y = np.asarray([fit_word(round_shift(int(v), k, arith.rounding), arith.data.width, arith.overflow)
                        for v in acc], dtype=object)
        return y
    y = _round_shift64(acc, k, arith.rounding)
    return fit_word(y, arith.data.width, arith.overflow)


def _round_shift64(v: np.ndarray, k: int, mode: str) -> np.ndarray:
    """``round_shift`` on int64 without the rounding addition wrapping (as in program.py)."""
    if mode in ("truncate", "toward-zero") or k <= 0:
        return round_shift(v, k, mode)
    q = v >> k
    r = v & ((1 << k) - 1)
    half = 1 << (k - 1)
    if mode == "add-half":
        return q + (r >= half)
    return q + (r > half) + ((r == half) & ((q & 1) == 1))  # half-even: ties to even


# ---------------------------------------------------------------- bounds

def _impulse(b, a, n):
    from scipy import signal

    x = np.zeros(n)
    x[0] = 1.0
    return signal.lfilter(b, a, x)


MAX_BOUND_LENGTH = 1 << 22


def _length(a) -> int:
    """Samples after which the impulse response of 1/A has decayed below 1e-16 (0: no bound)."""
    r = float(np.max(np.abs(np.roots(a)))) if len(a) > 1 else 0.0
    if r >= 1.0:
        return 0
    if r == 0.0:
        return 8
    n = np.ceil(np.log(1e-16) / np.log(r)) * 2
    if n > MAX_BOUND_LENGTH:
        return 0  # too slow a decay to sum rigorously: report no bound rather than a short one
    return int(max(64, n))


def error_interval(rounding: str) -> tuple[float, float]:
    """Centre and radius (LSB) of the rounding error of one ``round_shift``.

    add-half/half-even: [-1/2, 1/2]; truncate: (-1, 0]; toward-zero (magnitude truncation):
    (-1, 1) with the sign opposite to the value.
    """
    if rounding in ("add-half", "half-even"):
        return 0.0, 0.5
    if rounding == "truncate":
        return -0.5, 0.5
    return 0.0, 1.0


def granular_bounds(a_phys, noise_b, rounding: str) -> tuple[float, float, float] | None:
    """Rigorous bounds (LSB) on ``|y|``, ``|y[n-1] - y[n-2]|`` and ``|y[n-1] + y[n-2]|``.

    ``None`` when the section is not stable (no finite bound).
    """
    n = _length(a_phys)
    if n == 0:
        return None
    h = _impulse(noise_b, a_phys, n)
    c, r = error_interval(rounding)
    out = []
    for comb in ((1.0,), (1.0, -1.0), (1.0, 1.0)):
        g = np.convolve(h, comb)
        out.append(abs(c) * abs(float(np.sum(g))) + r * float(np.sum(np.abs(g))) + 1e-9 * (1 + n))
    return tuple(out)


# ---------------------------------------------------------------- exhaustive search

def _candidates(B: int, D: int, S: int, order: int):
    """Integer states (y1, y2) with |y1|,|y2| <= B, |y1-y2| <= D, |y1+y2| <= S."""
    if order == 1:
        y1 = np.arange(-B, B + 1, dtype=np.int64)
        return y1, np.zeros_like(y1)
    y1 = np.arange(-B, B + 1, dtype=np.int64)
    lo = np.maximum.reduce([np.full_like(y1, -B), y1 - D, -S - y1])
    hi = np.minimum.reduce([np.full_like(y1, B), y1 + D, S - y1])
    cnt = np.maximum(hi - lo + 1, 0)
    tot = int(cnt.sum())
    rows = np.repeat(y1, cnt)
    starts = np.repeat(lo, cnt)
    offs = np.arange(tot, dtype=np.int64) - np.repeat(np.cumsum(cnt) - cnt, cnt)
    return rows, starts + offs


def _count_candidates(B: int, D: int, S: int, order: int, cap: int) -> int:
    """Number of candidate states, or ``cap + 1`` as soon as it certainly exceeds *cap*."""
    if order == 1:
        return min(2 * B + 1, cap + 1)
    if 2 * B + 1 > 64 * cap:
        return cap + 1
    total = 0
    for lo_row in range(-B, B + 1, 1 << 20):  # in chunks: B may be large
        y1 = np.arange(lo_row, min(B, lo_row + (1 << 20) - 1) + 1, dtype=np.int64)
        lo = np.maximum.reduce([np.full_like(y1, -B), y1 - D, -S - y1])
        hi = np.minimum.reduce([np.full_like(y1, B), y1 + D, S - y1])
        total += int(np.maximum(hi - lo + 1, 0).sum())
        if total > cap:
            return cap + 1
    return total


def _engine_fits(a1: int, a2: int, k: int, arith: Arithmetic) -> bool:
    """Can the compiled core run this section's zero-input map (same integers as the numpy steps)?"""
    return (_zero_input_engine() is not None and arith.acc_bits <= 64 and 1 <= k <= 62
            and -(1 << 63) <= a1 < 1 << 63 and -(1 << 63) <= a2 < 1 << 63)


def cycle_states(a1: int, a2: int, k: int, arith: Arithmetic, B: int, D: int, S: int, order: int, *,
                 engine: bool = True):
    """Every nonzero state on a zero-input cycle inside the candidate region (exact).

    The states are returned in the order of ``(y1, y2)``.  The zero-input map
    restricted to the region is a function on a finite set (a state whose image
    leaves the region has no successor); the compiled core visits every state once
    and marks those on cycles (functional-graph cycle detection: follow unvisited
    states until the walk meets its own path, a cycle, or an earlier walk or the
    region's edge, no cycle).  Without it (``engine=False``, accumulators over 64
    bits), :func:`cycle_states_numpy`.

    References
    ----------
    D. E. Knuth, *The Art of Computer Programming*, vol. 2, 3rd ed., sec. 3.1,
    exercise 6 (every path of a function on a finite set ends in a cycle).
    """
    from ..simulate import _OVF_CODE, _ROUND_CODE, _engine

    if engine and _engine_fits(a1, a2, k, arith) and hasattr(_engine, "cycle_region"):
        b1, b2, _ = _engine.cycle_region(int(a1), int(a2) if order == 2 else 0, int(k), arith.acc_bits,
                                         _ROUND_CODE[arith.rounding], _OVF_CODE[arith.overflow], arith.data.width,
                                         int(B), int(D), int(S), int(order == 2))
        return np.frombuffer(b1, dtype=np.int64).copy(), np.frombuffer(b2, dtype=np.int64).copy()
    return cycle_states_numpy(a1, a2, k, arith, B, D, S, order)


def cycle_states_numpy(a1: int, a2: int, k: int, arith: Arithmetic, B: int, D: int, S: int, order: int):
    """:func:`cycle_states` in numpy (the reference, and the path for accumulators over 64 bits).

    The candidate set ``C`` contains every cycle; iterate ``C <- f(C) & region``
    until its size stops changing; then ``f`` maps ``C`` onto itself and every
    state left lies on a cycle.
    """
    y1, y2 = _candidates(B, D, S, order)
    W = 2 * B + 1
    size = len(y1)
    while True:
        # S_(i+1) = f(S_i) & region is a subset of S_i; deduplicate every few steps and stop
        # when eight more steps leave the set as large as it was (then f maps it onto itself)
        for _ in range(8):
            y0 = zero_input_step(y1, y2, a1, a2 if order == 2 else 0, k, arith)
            n1, n2 = y0, (y1 if order == 2 else np.zeros_like(y1))
            keep = (np.abs(n1) <= B) & (np.abs(n1 - n2) <= D) & (np.abs(n1 + n2) <= S)
            y1, y2 = n1[keep], n2[keep]
        key = np.unique((y1 + B) * W + (y2 + B))
        y1, y2 = key // W - B, key % W - B
        if len(key) == size:
            break
        size = len(key)
    nz = (y1 != 0) | (y2 != 0)
    return y1[nz], y2[nz]


def step_int(y1: int, y2: int, a1: int, a2: int, k: int, arith: Arithmetic) -> int:
    """The zero-input recursion for one state, in exact Python integers."""
    acc = fit_word(-a1 * y1 - a2 * y2, arith.acc_bits, "wrap")
    return fit_word(round_shift(acc, k, arith.rounding), arith.data.width, arith.overflow)


def _compiled_walk(y1, y2, e, a1, a2, k, arith, limit, ef):
    """The cycle from one state by the compiled core (Brent's method), ``False`` when it cannot run.

    ``None`` when the walk does not close within *limit* distinct states, else the
    cycle's states from the first one met, as in :func:`_walk` / :func:`_walk_ef`.

    References
    ----------
    R. P. Brent, "An improved Monte Carlo factorization algorithm", BIT 20(2), 1980
    (the cycle-finding method, sec. 2).
    """
    from ..simulate import _OVF_CODE, _ROUND_CODE, _engine

    lim = 1 << 62
    if not (_engine_fits(a1, a2, k, arith) and hasattr(_engine, "walk")
            and all(-lim <= int(v) < lim for v in (y1, y2, e))):
        return False
    got = _engine.walk(int(y1), int(y2), int(e), int(a1), int(a2), int(k), arith.acc_bits,
                       _ROUND_CODE[arith.rounding], _OVF_CODE[arith.overflow], arith.data.width, int(bool(ef)),
                       int(limit))
    if got is None:
        return None
    t = np.frombuffer(got, dtype=np.int64).reshape(-1, 3).tolist()
    return [tuple(p) for p in t] if ef else [(p[0], p[1]) for p in t]


def _walk(y1: int, y2: int, a1: int, a2: int, k: int, arith: Arithmetic, limit: int = 1 << 16):
    """Follow a state until it repeats: (period, amplitude, states on the cycle)."""
    cyc = _compiled_walk(y1, y2, 0, a1, a2, k, arith, limit, False)
    if cyc is None:
        return None, None, []
    if cyc:
        return len(cyc), max(max(abs(p[0]), abs(p[1])) for p in cyc), cyc
    return _walk_python(y1, y2, a1, a2, k, arith, limit)


def _walk_python(y1: int, y2: int, a1: int, a2: int, k: int, arith: Arithmetic, limit: int = 1 << 16):
    """:func:`_walk` in Python integers (the reference)."""
    seen = {}
    path = []
    s = (int(y1), int(y2))
    for i in range(limit):
        if s in seen:
            cyc = path[seen[s]:]
            return len(cyc), max(max(abs(p[0]), abs(p[1])) for p in cyc), cyc
        seen[s] = i
        path.append(s)
        s = (step_int(s[0], s[1], a1, a2, k, arith), s[0])
    return None, None, []


# ---------------------------------------------------------------- df1ef: residual intervals

def _residual_range(k: int, mode: str) -> tuple[int, int]:
    """Inclusive range of the df1ef residual ``E = acc - round_shift(acc, k) * 2^k``."""
    K, h = 1 << k, 1 << (k - 1)
    return {"add-half": (-h, h - 1), "half-even": (-h, h), "truncate": (0, K - 1), "toward-zero": (-(K - 1), K - 1)}[mode]


def _run_exit(ea: int, eb: int, lo: int, hi: int, d: int) -> list:
    """Residuals where a run of repeated outputs ends.

    While the output repeats, the residual moves by ``d`` each sample and stays in
    [lo, hi]; the run from ``E`` ends at the first ``E + t d`` outside it.  Returns
    the exit residuals of every start in [ea, eb] as a list of intervals.
    """
    if d == 0:
        return [[ea, eb]]  # a fixed point: the run never ends
    if d < 0:  # mirror
        return [[-b, -a] for a, b in _run_exit(-eb, -ea, -hi, -lo, -d)]
    z = hi + 1  # exits lie in [hi + 1, hi + d]
    if eb - ea + 1 >= d:
        return [[z, z + d - 1]]
    ra, rb = (ea - z) % d, (eb - z) % d
    if ra <= rb:
        return [[z + ra, z + rb]]
    return [[z + ra, z + d - 1], [z, z + rb]]


def _windows(v: np.ndarray, k: int, mode: str) -> tuple[np.ndarray, np.ndarray]:
    """Inclusive accumulator ranges that ``round_shift(acc, k, mode)`` maps to each output *v*."""
    K, h = 1 << k, 1 << (k - 1)
    if mode == "add-half":
        return v * K - h, v * K + h - 1
    if mode == "truncate":
        return v * K, v * K + K - 1
    if mode == "half-even":
        odd = (v & 1).astype(bool)
        return v * K - h + odd, v * K + h - odd
    lo = np.where(v > 0, v * K, np.where(v < 0, v * K - K + 1, -K + 1))
    hi = np.where(v > 0, v * K + K - 1, np.where(v < 0, v * K, K - 1))
    return lo, hi


def _runs_exit(ea, eb, lo, hi, d):
    """Vectorised :func:`_run_exit` for d != 0: (index, lo, hi) of the exit intervals."""
    neg = d < 0
    # mirror the negative drifts so that every drift is positive
    ea, eb, lo, hi, d = (np.where(neg, -eb, ea), np.where(neg, -ea, eb), np.where(neg, -hi, lo),
                         np.where(neg, -lo, hi), np.abs(d))
    z = hi + 1
    full = eb - ea + 1 >= d
    ra, rb = np.mod(ea - z, d), np.mod(eb - z, d)
    one = ~full & (ra <= rb)
    two = ~full & (ra > rb)
    idx = np.arange(len(d))
    parts = [
        (idx[full], z[full], (z + d - 1)[full]),
        (idx[one], (z + ra)[one], (z + rb)[one]),
        (idx[two], (z + ra)[two], (z + d - 1)[two]),
        (idx[two], z[two], (z + rb)[two]),
    ]
    i = np.concatenate([p[0] for p in parts])
    a = np.concatenate([p[1] for p in parts])
    b = np.concatenate([p[2] for p in parts])
    m = neg[i]
    return i, np.where(m, -b, a), np.where(m, -a, b)


def ef_interval_search(a1: int, a2: int, k: int, arith: Arithmetic, B: int, D: int, S: int, order: int,
                       max_work: int = 3_000_000, low: tuple[int, int, int] | None = None):
    """Exhaustive zero-input search of a df1ef section over (y1, y2) and every residual E.

    For fixed outputs ``(y1, y2)`` the next output is constant on at most a few
    intervals of ``E`` and the new residual is ``E`` shifted by a constant there, so
    sets of states are kept exactly as unions of residual intervals per output pair.
    The candidate set (every state with outputs inside the bounds) is mapped until it
    stops shrinking, as in :func:`cycle_states`.  A run of equal outputs (poles near
    z = 1 make them long: the residual drifts by a constant each sample until the
    output steps) is taken in one jump to the state where it ends; cycles of the
    jumping map are exactly the cycles of the recursion, since a run with a nonzero
    drift always ends.  Returns ``(status, pairs, found)`` with status ``none`` or
    ``found``, or ``None`` when it did not settle within *max_work* interval steps
    (or the numbers would not fit 64 bits).

    *low* ``= (A1L, A2L, L)``: the section is ``df1ef-wide-fb``; the accumulator of a
    state is ``-A1 y1 - A2 y2 - floor((A1L y1 + A2L y2) / 2^L) + E``, still an integer
    constant per output pair plus ``E``, so the same interval argument holds with
    that constant.
    """
    K = 1 << k
    lo_e, hi_e = _residual_range(k, arith.rounding)
    mode = arith.rounding
    W = 2 * B + 1
    big = 1 << (k + 2)  # separates the residual ranges of different output pairs
    l1, l2, L = low if low is not None else (0, 0, 1)
    if ((abs(a1) + abs(a2)) * B + (((abs(l1) + abs(l2)) * B) >> L) + 1 + 2 * K >= 1 << min(arith.acc_bits - 1, 62)
            or W * W * big >= 1 << 62 or k < 1):
        return None
    y1 = np.arange(-B, B + 1, dtype=np.int64)
    if order == 2:
        y1, y2 = np.repeat(y1, W), np.tile(y1, W)
        keep = (np.abs(y1 - y2) <= D) & (np.abs(y1 + y2) <= S)
        y1, y2 = y1[keep], y2[keep]
    else:
        y2 = np.zeros_like(y1)
    pairs = len(y1)
    ea = np.full(pairs, lo_e, dtype=np.int64)
    eb = np.full(pairs, hi_e, dtype=np.int64)
    size = int(np.sum(eb - ea + 1))
    work = 0
    while work <= max_work:
        P = -np.int64(a1) * y1 - np.int64(a2) * y2
        if low is not None:
            P = P - ((np.int64(l1) * y1 + np.int64(l2) * y2) >> L)  # floor(P_lo / 2^L)
        lo, hi = P + ea, P + eb
        v0 = round_shift(lo, k, mode)
        m = round_shift(hi, k, mode) - v0 + 1  # windows of consecutive outputs tile the range
        idx = np.repeat(np.arange(len(lo)), m)
        v = np.repeat(v0, m) + (np.arange(len(idx)) - np.repeat(np.cumsum(m) - m, m))
        wlo, whi = _windows(v, k, mode)
        pa, pb = np.maximum(lo[idx], wlo), np.minimum(hi[idx], whi)
        work += len(idx)
        o1, o2, Pi = y1[idx], y2[idx], P[idx]
        ok = np.abs(v) <= B
        if order == 2:
            ok &= (np.abs(v - o1) <= D) & (np.abs(v + o1) <= S)
        v, o1, o2, pa, pb, Pi, wlo, whi = (x[ok] for x in (v, o1, o2, pa, pb, Pi, wlo, whi))
        n1, n2 = v, (o1 if order == 2 else np.zeros_like(v))
        d = Pi - v * K
        loop = (n1 == o1) & (n2 == o2) & (v != 0) & (d != 0)
        step = ~loop
        # ordinary step: the residual shifts by -v*2^k
        na, nb = pa[step] - v[step] * K, pb[step] - v[step] * K
        k1, k2 = n1[step], n2[step]
        # runs of equal outputs: jump to their ends
        j, ja, jb = _runs_exit(pa[loop] - Pi[loop], pb[loop] - Pi[loop], wlo[loop] - Pi[loop],
                               whi[loop] - Pi[loop], d[loop])
        k1 = np.concatenate([k1, n1[loop][j]])
        k2 = np.concatenate([k2, n2[loop][j]])
        na = np.concatenate([na, ja])
        nb = np.concatenate([nb, jb])
        # merge the intervals of every output pair (pairs kept apart by the offset big)
        key = (k1 + B) * W + (k2 + B)
        ga, gb = key * big + (na - lo_e), key * big + (nb - lo_e)
        order_ = np.lexsort((ga, key))
        ga, gb = ga[order_], gb[order_]
        if len(ga) == 0:
            return "none", pairs, None
        reach = np.maximum.accumulate(gb)
        start = np.ones(len(ga), dtype=bool)
        start[1:] = ga[1:] > reach[:-1] + 1
        first = np.flatnonzero(start)
        ga, gb = ga[first], np.maximum.reduceat(gb, first)
        key = ga // big
        y1, y2 = key // W - B, key % W - B
        ea, eb = ga - key * big + lo_e, gb - key * big + lo_e
        nsize = int(np.sum(eb - ea + 1))
        if nsize == size:
            live = (y1 != 0) | (y2 != 0)
            if not np.any(live):
                return "none", pairs, None
            i = int(np.argmax(np.where(live, np.maximum(np.abs(y1), np.abs(y2)), -1)))
            if low is None:
                per, am, cyc = _walk_ef(int(y1[i]), int(y2[i]), int(ea[i]), a1, a2, k, arith, 1 << 20)
            else:
                per, am, cyc = _walk_ef_wide(int(y1[i]), int(y2[i]), int(ea[i]), (a1, a2, l1, l2, L), k, arith,
                                             1 << 20)
            if not per:  # pragma: no cover - every state of the settled set lies on a cycle
                return None
            start_state = max(cyc, key=lambda p: abs(p[0]))
            return "found", pairs, Cycle(int(am), int(per), tuple(int(x) for x in start_state))
        size = nsize
    return None


# ---------------------------------------------------------------- per section

def _section_phys(op: SectionOp, arith: Arithmetic):
    return np.array([1.0, *op.a_phys(arith.coef)])


def step_wide_int(y1: int, y2: int, op: SectionOp, k: int, arith: Arithmetic) -> int:
    """Zero-input ``df1-wide-fb`` step in exact integers (coefc.program's recurrence)."""
    lo1, lo2 = (int(v) for v in op.a_lo) if op.a_lo else (0, 0)
    exact = -int(op.a[0]) * y1 - int(op.a[1]) * y2 - ((lo1 * y1 + lo2 * y2) >> lo_bits(arith.coef))
    half = 1 << (arith.acc_bits - 1)
    acc = ((exact + half) % (2 * half)) - half
    return fit_word(round_shift(acc, k, arith.rounding), arith.data.width, arith.overflow)


def _analyse_wide(op: SectionOp, index: int, arith: Arithmetic, *, sample_starts: int = 64,
                  sample_steps: int = 4096, seed: int = 1969) -> SectionLimitCycles:
    """Limit-cycle verdicts of a ``df1-wide-fb`` section.

    Granular: with zero input ``acc = ceil(-(a1' y1 + a2' y2))`` in accumulator LSB
    (``a'`` the high and low words together), so the output is the rounded linear
    map plus an error in the rounding interval widened by ``[0, 2^-k)`` (the floor
    of the low products).  The l1 bound of :func:`granular_bounds` with that
    interval is rigorous; below one LSB no nonzero state can be on a cycle
    (``none``).  Otherwise ``unproven``: coefc has no exhaustive search of this
    map yet (a sampled search may still find a cycle).  Overflow: the accumulator
    is monotone in the linear form, so its extremes over the data-word box lie at
    the corners (exact); when every rounded extreme fits, no step overflows
    (``none``), else ``unproven``.
    """
    a_phys = _section_phys(op, arith)
    order = 2 if (int(op.a[1]) != 0 or (op.a_lo and int(op.a_lo[1]) != 0)) else 1
    k = arith.coef.frac_bits - op.shift
    c, r = error_interval(arith.rounding)
    ek = 2.0 ** -k
    c, r = c + ek / 2, r + ek / 2
    n = _length(a_phys)
    bounds = None
    if n:
        h = _impulse(np.array([1.0]), a_phys, n)
        bounds = abs(c) * abs(float(np.sum(h))) + r * float(np.sum(np.abs(h))) + 1e-9 * (1 + n)
    fs_lsb = float(arith.data.max_int)
    if bounds is None:
        res = GranularVerdict("unproven", None, False, 0, note=_NO_BOUND)
    elif bounds < 1.0:
        res = GranularVerdict("none", bounds, True, 0,
                              note="the granular bound is below one LSB: no nonzero state can lie on a cycle")
    else:
        res = GranularVerdict("unproven", bounds, False, 0,
                              note=("df1-wide-fb: no exhaustive search of its zero-input map in coefc yet; "
                                    + ("the bound reaches full scale" if bounds >= fs_lsb else
                                       f"the granular bound is {bounds:.4g} LSB") + "; sampled search only"))
        rng = np.random.default_rng(seed)
        B = int(min(bounds, fs_lsb))
        for _ in range(sample_starts):
            y1, y2 = (int(v) for v in rng.integers(-B, B + 1, size=2))
            seen = {}
            for t in range(sample_steps):
                if (y1, y2) in seen:
                    per = t - seen[(y1, y2)]
                    cyc, a, b = [], y1, y2
                    for _ in range(per):
                        cyc.append(a)
                        a, b = step_wide_int(a, b, op, k, arith), a
                    amp = max(abs(v) for v in cyc)
                    if amp > 0 and (res.cycle.amplitude_lsb if res.cycle else 0) < amp:
                        res = replace(res, status="found", cycle=Cycle(amp, per, (y1, y2)),
                                      states_searched=sample_starts)
                    break
                seen[(y1, y2)] = t
                y1, y2 = step_wide_int(y1, y2, op, k, arith), y1
    # overflow: exact extremes of the zero-input accumulator at the corners of the data-word box
    lo, hi = arith.data.min_int, arith.data.max_int
    L = lo_bits(arith.coef)
    l1, l2 = (int(v) for v in op.a_lo) if op.a_lo else (0, 0)
    corners = [(u, v) for u in (lo, hi) for v in ((lo, hi) if order == 2 else (0,))]
    sums = [-int(op.a[0]) * u - int(op.a[1]) * v - ((l1 * u + l2 * v) >> L) for u, v in corners]
    top = 1 << (arith.acc_bits - 1)
    amin, amax = min(sums), max(sums)
    if amax >= top or amin < -top:
        ov = OverflowVerdict("unproven",
                             note=f"the accumulator can wrap ({amin}..{amax} outside {arith.acc_bits} bits) and "
                                  "coefc has no exhaustive search of the df1-wide-fb map")
    else:
        rmin, rmax = round_shift(amin, k, arith.rounding), round_shift(amax, k, arith.rounding)
        if lo <= rmin and rmax <= hi:
            ov = OverflowVerdict("none",
                                 note=f"no zero-input step can overflow: over every state of the data word the "
                                      f"rounded accumulator spans {rmin}..{rmax} LSB against the word's {lo}..{hi} "
                                      "(exact, rounding and the low products included)")
        else:
            ov = OverflowVerdict("unproven",
                                 note=f"a zero-input step can overflow (rounded accumulator {rmin}..{rmax} LSB "
                                      f"against {lo}..{hi}) and coefc has no exhaustive search of the "
                                      "df1-wide-fb map")
    return SectionLimitCycles(index, res, ov)


def _wide_words(op: SectionOp, arith: Arithmetic) -> tuple[int, int, int, int, int]:
    """``(A1H, A2H, A1L, A2L, L)`` of a double-word-feedback section."""
    l1, l2 = (int(v) for v in op.a_lo) if op.a_lo else (0, 0)
    return int(op.a[0]), int(op.a[1]), l1, l2, lo_bits(arith.coef)


def step_ef_wide_int(y1: int, y2: int, e: int, words, k: int, arith: Arithmetic) -> tuple[int, int]:
    """Zero-input ``df1ef-wide-fb`` step in exact integers: ``(y[n], new residual E)``.

    *words* is ``(A1H, A2H, A1L, A2L, L)`` (:func:`_wide_words`); the recurrence is
    coefc.program's: the floored low products are in the accumulator whose
    residual is kept.
    """
    a1, a2, l1, l2, L = words
    acc = fit_word(-a1 * y1 - a2 * y2 - ((l1 * y1 + l2 * y2) >> L) + e, arith.acc_bits, "wrap")
    v = round_shift(acc, k, arith.rounding)
    return fit_word(v, arith.data.width, arith.overflow), acc - (v << k)


def zero_input_step_ef_wide(y1, y2, e, words, k: int, arith: Arithmetic):
    """:func:`step_ef_wide_int` on int64 arrays (accumulators up to 64 bits, products exact in int64)."""
    a1, a2, l1, l2, L = words
    acc = -(np.int64(a1) * y1) - (np.int64(a2) * y2) - ((np.int64(l1) * y1 + np.int64(l2) * y2) >> L) + e
    if arith.acc_bits < 64:
        acc = fit_word(acc, arith.acc_bits, "wrap")
    v = round_shift(acc, k, arith.rounding)
    return fit_word(v, arith.data.width, arith.overflow), acc - np.left_shift(v, k)


def _walk_states(s, step, limit):
    """Follow an error-feedback state ``s = (y1, y2, E)`` under ``step(y1, y2, E) -> (y0, E')``
    until it repeats: ``(period, amplitude, cycle states)``, or ``(None, None, [])`` after *limit* steps."""
    seen, path = {}, []
    for i in range(limit):
        if s in seen:
            cyc = path[seen[s]:]
            return len(cyc), max(abs(p[0]) for p in cyc), cyc
        seen[s] = i
        path.append(s)
        y0, en = step(*s)
        s = (y0, s[0], en)
    return None, None, []


def _walk_ef_wide(y1, y2, e, words, k, arith, limit):
    """Follow a df1ef-wide-fb state ``(y1, y2, E)`` until it repeats: (period, amplitude, cycle states)."""
    return _walk_states((y1, y2, e), lambda a, b, c: step_ef_wide_int(a, b, c, words, k, arith), limit)


def ef_wide_bounds(a_phys, k: int, rounding: str) -> tuple[float, float, float] | None:
    """Rigorous granular bounds (LSB) of a ``df1ef-wide-fb`` section, as :func:`granular_bounds`.

    With zero input and no overflow, ``acc[n] = -K (a1' y[n-1] + a2' y[n-2]) + phi[n] +
    E[n-1]`` (``K = 2^k``, ``a'`` the physical coefficients with the low words, ``phi``
    in ``[0, 1)`` the fraction the floor of the low products adds) and ``y[n] =
    (acc[n] - E[n]) / K``, so ``A(z) y = (1 - z^-1)(-E/K) + phi/K``: the residual
    ``-E/K`` lies in the rounding's error interval and reaches ``y`` through
    ``(1 - z^-1)/A(z)``, ``phi/K`` lies in ``[0, 2^-k)`` and reaches it through
    ``1/A(z)``.  A periodic ``y`` is the convolution of these bounded sequences with
    the two impulse responses, so each bound is the sum of the two l1 bounds
    (Jackson 1969's argument applied to both sources).  ``None`` when not stable.
    """
    n = _length(a_phys)
    if n == 0:
        return None
    hs = _impulse(np.array([1.0, -1.0]), a_phys, n)
    hf = _impulse(np.array([1.0]), a_phys, n)
    c, r = error_interval(rounding)
    cf = rf = 2.0 ** -k / 2
    out = []
    for comb in ((1.0,), (1.0, -1.0), (1.0, 1.0)):
        gs, gf = np.convolve(hs, comb), np.convolve(hf, comb)
        out.append(abs(c) * abs(float(np.sum(gs))) + r * float(np.sum(np.abs(gs)))
                   + cf * abs(float(np.sum(gf))) + rf * float(np.sum(np.abs(gf))) + 2e-9 * (1 + n))
    return tuple(out)


def _analyse_ef_wide(op: SectionOp, index: int, arith: Arithmetic, *, sample_starts: int = 256,
                     sample_steps: int = 4096, seed: int = 1969, ef_work: int = 3_000_000,
                     overflow_starts: int = 256) -> SectionLimitCycles:
    """Limit-cycle verdicts of a ``df1ef-wide-fb`` section (and of a ``df1ef-wide`` one: the same
    zero-input map, its numerator's low words acting on the input only).

    Granular: the bounds of :func:`ef_wide_bounds` (rigorous); inside them the
    exhaustive search over every output pair and every rounding residual of
    :func:`ef_interval_search` (with the floored low products in each pair's
    constant) gives ``none`` or ``found``; when the bound reaches full scale or the
    search does not settle, ``unproven`` with the reason (a sampled search may still
    find a cycle).  Overflow: the zero-input accumulator ``ceil(-T / 2^L) + E``, ``T``
    linear in ``(y1, y2)``, is extreme at a corner of the data-word box and an end
    of the residual range (exact); when every rounded extreme fits, no step
    overflows (``none``); otherwise full-scale corners and random large states are
    run (``found`` when one oscillates), else ``unproven``: the state space (two
    data words and a residual) is too large to search.
    """
    words = _wide_words(op, arith)
    a1, a2, l1, l2, L = words
    order = 2 if (a2 != 0 or l2 != 0) else 1
    k = arith.coef.frac_bits - op.shift
    a_phys = _section_phys(op, arith)
    fs_lsb = float(arith.data.max_int)
    bounds = ef_wide_bounds(a_phys, k, arith.rounding) if k >= 1 else None
    notes = []
    if k < 1:
        res = GranularVerdict("unproven", None, False, 0, note=_NO_ROUNDING)
    elif bounds is None:
        res = GranularVerdict("unproven", None, False, 0, note=_NO_BOUND)
    else:
        Bf, Df, Sf = bounds
        B, D, S = int(math.floor(Bf)), int(math.floor(Df)), int(math.floor(Sf))
        if order == 1:
            D = S = 2 * B
        else:
            B = min(B, (D + S) // 2)
        found = None
        if B < fs_lsb:
            found = _granular_cached(("efwide", words, k, B, D, S, order, ef_work), arith,
                                     lambda: ef_interval_search(a1, a2 if order == 2 else 0, k, arith, B, D, S,
                                                                order, max_work=ef_work, low=(l1, l2, L)))
            if found is None:
                notes.append("df1ef-wide-fb keeps the rounding residual as state; the search over residual "
                             f"intervals did not settle within its work limit ({ef_work} interval steps) or its "
                             "numbers would not fit 64 bits; sampled search only")
        else:
            notes.append(f"the granular bound ({Bf:.4g} LSB) reaches full scale: the floor of the low products "
                         "is not fed back and 1/A(z) amplifies it; sampled search only")
        if found is not None:
            status, keys, cyc = found
            res = GranularVerdict(status, Bf, True, keys, cycle=cyc)
            notes.append(f"searched {keys} output-state pairs, each with every rounding residual (as intervals)")
        else:
            hit = _sampled_ef_wide(words, k, arith, int(min(B, fs_lsb)), order, sample_starts, sample_steps, seed)
            res = (GranularVerdict("found", Bf, False, sample_starts, cycle=hit) if hit
                   else GranularVerdict("unproven", Bf, False, 0))
        res = replace(res, note="; ".join(notes))
    return SectionLimitCycles(index, res, _overflow_ef_wide(words, k, a_phys, arith, order, bounds,
                                                             overflow_starts, seed))


def _run_ef_wide(y1, y2, e, words, k, arith, order, steps, tail=0):
    """int64 zero-input runs of df1ef-wide-fb states: ``(y1, y2, e, peak |y1| over the last *tail* steps)``."""
    big = np.zeros(len(y1))
    for i in range(steps + tail):
        y0, e = zero_input_step_ef_wide(y1, y2, e, words, k, arith)
        y1, y2 = y0, (y1 if order == 2 else np.zeros_like(y1))
        if i >= steps:
            big = np.maximum(big, np.abs(y1).astype(float))
    return y1, y2, e, big


def _sampled_ef_wide(words, k, arith, B, order, starts, steps, seed):
    """Random states inside the bound (random residuals): the largest cycle they settle in, if any."""
    if arith.acc_bits > 64 or B < 1:
        return None
    rng = np.random.default_rng(seed)
    y1 = rng.integers(-B, B + 1, starts).astype(np.int64)
    y2 = rng.integers(-B, B + 1, starts).astype(np.int64) if order == 2 else np.zeros(starts, np.int64)
    lo_e, hi_e = _residual_range(k, arith.rounding)
    e = rng.integers(lo_e, hi_e + 1, starts).astype(np.int64)
    y1, y2, e, _ = _run_ef_wide(y1, y2, e, words, k, arith, order, steps)
    alive = (y1 != 0) | (y2 != 0)
    finals = sorted(set(zip(y1[alive].tolist(), y2[alive].tolist(), e[alive].tolist())),
                    key=lambda p: -max(abs(p[0]), abs(p[1])))
    best = None
    for s in finals[:8]:
        per, am, cyc = _walk_ef_wide(s[0], s[1], s[2], words, k, arith, 4 * steps)
        if per and am and (best is None or am > best[1]):
            best = (per, am, max(cyc, key=lambda p: abs(p[0])))
    if best is None:
        return None
    return Cycle(int(best[1]), int(best[0]), tuple(int(v) for v in best[2]))


def _overflow_ef_wide(words, k, a_phys, arith, order, bounds, starts, seed) -> OverflowVerdict:
    """Overflow-oscillation verdict of a df1ef-wide-fb section."""
    a1, a2, l1, l2, L = words
    lo, hi = arith.data.min_int, arith.data.max_int
    corners = [(u, v) for u in (lo, hi) for v in ((lo, hi) if order == 2 else (0,))]
    sums = [-a1 * u - a2 * v - ((l1 * u + l2 * v) >> L) for u, v in corners]
    elo, ehi = _residual_range(k, arith.rounding) if k >= 1 else (0, 0)
    amin, amax = min(sums) + elo, max(sums) + ehi
    top = 1 << (arith.acc_bits - 1)
    if amax >= top or amin < -top:
        detail = f"the accumulator can wrap ({amin}..{amax} outside {arith.acc_bits} bits)"
    else:
        rmin, rmax = round_shift(amin, k, arith.rounding), round_shift(amax, k, arith.rounding)
        detail = (f"over every state of the data word and every residual the rounded accumulator spans "
                  f"{rmin}..{rmax} LSB against the word's {lo}..{hi}")
        if lo <= rmin and rmax <= hi:
            return OverflowVerdict("none",
                                   note=f"no zero-input step can overflow: {detail} (exact, rounding, residual and "
                                        "the low products included), so every cycle lies inside the granular bound")
    why = (f"overflow is possible ({detail}), and the state space (two {arith.data.width}-bit words and a "
           "rounding residual) is too large to search exhaustively")
    if arith.acc_bits > 64:
        return OverflowVerdict("unproven", why + "; no large-state run for accumulators wider than 64 bits")
    rng = np.random.default_rng(seed + 1)
    cs = np.array([(hi, hi), (hi, lo), (lo, hi), (lo, lo), (hi, 0), (lo, 0), (0, hi), (0, lo)], dtype=np.int64)
    st = np.vstack([cs, rng.integers(lo, hi + 1, size=(starts, 2), dtype=np.int64)])
    y1 = st[:, 0].copy()
    y2 = st[:, 1].copy() if order == 2 else np.zeros(len(st), np.int64)
    e = np.zeros(len(st), dtype=np.int64)
    r = float(np.max(np.abs(np.roots(a_phys[: order + 1])))) if order else 0.0
    steps = int(min(8192, max(256, 40.0 / max(1e-6, 1.0 - r)))) if r < 1 else 1024
    gran = (bounds[0] if bounds else 0.0) + 1.0
    y1, y2, e, big = _run_ef_wide(y1, y2, e, words, k, arith, order, steps, 64)
    return _oscillation_verdict(big, gran, st, order, steps, hi, arith, why, lambda j: _walk_ef_wide(
        int(y1[j]), int(y2[j]), int(e[j]), words, k, arith, 1 << 15))


def analyse_section(op: SectionOp, index: int, arith: Arithmetic, *, max_states: int = MAX_STATES,
                    sample_starts: int = 512, sample_steps: int = 2048, overflow_starts: int = 256,
                    seed: int = 1969, ef_work: int = 3_000_000) -> SectionLimitCycles:
    """Granular limit cycles and overflow oscillations of one section with zero input.

    With rounded products (``arith.product_shift > 0``) the zero-input map rounds each
    feedback product before the sum, ``y = fit(round_shift(q(-A1 y1) + q(-A2 y2), k))``;
    the bounds and searches here are written for the map with exact products, so
    both verdicts are ``unproven`` and say why (no claim rests on an argument that
    does not cover the map).
    """
    st = STRUCTURE_TABLE[op.structure or arith.structure]
    if st.wide_feedback and st.error_feedback:
        # df1ef-wide-fb, and df1ef-wide: its double-word numerator acts on the input only (x = 0 gives
        # Q = 0, floor(0) = 0; coefc.program), so its zero-input map is df1ef-wide-fb's, word for word,
        # and df1ef-wide-fb's verdicts (bounds, exhaustive search, overflow) are its verdicts
        return _analyse_ef_wide(op, index, arith, seed=seed, ef_work=ef_work, overflow_starts=overflow_starts)
    if st.wide_feedback:
        return _analyse_wide(op, index, arith, seed=seed)
    a1, a2 = int(op.a[0]), int(op.a[1])
    if not arith.is_float and arith.product_shift and (a1 or a2):
        why = (f"every product is rounded by 2^{arith.product_shift} before the sum ([arithmetic] "
               "product_shift); the amplitude bound and the exhaustive searches cover only the zero-input map "
               "with exact products, so nothing is proven for this map")
        return SectionLimitCycles(index, GranularVerdict("unproven", None, False, 0, note=why),
                                  OverflowVerdict("unproven", why))
    order = 2 if a2 != 0 else 1
    k = arith.coef.frac_bits - op.shift
    a_phys = _section_phys(op, arith)
    structure = op.structure or arith.structure
    ef = structure == "df1ef"
    noise_b = np.array([1.0, -1.0]) if ef else np.array([1.0])
    bounds = granular_bounds(a_phys, noise_b, arith.rounding)
    can_overflow = overflow_reach(a1, a2 if order == 2 else 0, k, arith, order, ef)[0]
    res = _granular(a1, a2, k, arith, order, structure, bounds, max_states, sample_starts, sample_steps, seed,
                    ef_work)
    whole = None
    if can_overflow or res.status == "unproven":
        whole = _whole_cached(a1, a2 if order == 2 else 0, k, arith, order, ef)
    if whole is not None and res.status == "unproven":
        # the whole map was searched: its overflow-free cycles are exactly the granular ones
        note = (res.note + "; " if res.note else "") + \
            f"resolved by an exhaustive search of all {whole.states} states of the zero-input map"
        res = GranularVerdict("found" if whole.granular else "none", res.bound_lsb, True, whole.states,
                              cycle=whole.granular, note=note)
    return SectionLimitCycles(index, res, _overflow(a1, a2, k, a_phys, arith, order, bounds, overflow_starts,
                                                    seed, ef, whole))


def _granular(a1, a2, k, arith, order, structure, bounds, max_states, sample_starts, sample_steps, seed,
              ef_work) -> GranularVerdict:
    """Granular verdict of one section."""
    fs_lsb = float(arith.data.max_int)
    notes = []
    if k <= 0:
        # no rounding in the loop: the recursion is exact, only an unstable one can cycle
        status = "none" if bounds is not None else "unproven"
        return GranularVerdict(status, 0.0 if bounds else None, True, 0, note=_NO_ROUNDING)
    if bounds is None:
        return GranularVerdict("unproven", None, False, 0, note=_NO_BOUND)
    Bf, Df, Sf = bounds
    B, D, S = int(math.floor(Bf)), int(math.floor(Df)), int(math.floor(Sf))
    if order == 1:
        D = S = 2 * B
    else:
        B = min(B, (D + S) // 2)  # |y1 - y2| <= D and |y1 + y2| <= S bound |y1| and |y2| too
    exhaustive_ok = structure in ("df1", "tdf2") and B < fs_lsb
    count = _count_candidates(B, D, S, order, max_states) if exhaustive_ok else 0
    ef_result = None
    if structure == "df1ef" and B < fs_lsb:
        ef_result = _granular_cached(("ef", a1, a2 if order == 2 else 0, k, B, D, S, order, ef_work), arith,
                                     lambda: ef_interval_search(a1, a2 if order == 2 else 0, k, arith, B, D, S,
                                                                order, max_work=ef_work))
        if ef_result is None:
            notes.append("df1ef keeps the rounding residual as state; the search over residual intervals did "
                         f"not settle within its work limit ({ef_work} interval steps); sampled search only")
    if B >= fs_lsb:
        notes.append("the bound reaches full scale: the granular model gives no useful bound")
    if ef_result is not None:
        status, keys, found = ef_result
        res = GranularVerdict(status, Bf, True, keys, cycle=found)
        notes.append(f"searched {keys} output-state pairs, each with every rounding residual (as intervals)")
    elif exhaustive_ok and count <= max_states:
        found = _granular_cached(("cycles", a1, a2, k, B, D, S, order), arith,
                                 lambda: _cycle_search(a1, a2, k, arith, B, D, S, order))
        res = GranularVerdict("found" if found else "none", Bf, True, count, cycle=found)
    else:
        res = GranularVerdict("unproven", Bf, False, 0)
        if exhaustive_ok:
            notes.append(f"more candidate states than the search limit of {max_states}")
            res = replace(res, search_limited=True)
        if structure in ("df1", "tdf2") or B < fs_lsb:
            found = _sampled(a1, a2 if order == 2 else 0, k, arith, B, sample_starts, sample_steps, seed,
                             ef=structure == "df1ef")
            if found:
                res = replace(res, status="found", cycle=found, states_searched=sample_starts)
    return replace(res, note="; ".join(notes))


def _cycle_search(a1, a2, k, arith, B, D, S, order) -> Cycle | None:
    """The largest cycle among every state on a zero-input cycle in the region, or ``None``."""
    y1, y2 = cycle_states(a1, a2, k, arith, B, D, S, order)
    if len(y1) == 0:
        return None
    return _describe(y1, y2, a1, a2 if order == 2 else 0, k, arith)


_GRANULAR_CACHE: dict = {}


def _granular_cached(key: tuple, arith: Arithmetic, search):
    """The result of an exhaustive granular search, computed once per process.

    The searches (:func:`_cycle_search`, :func:`ef_interval_search`) are called only
    with bounds below full scale, and every state they keep or walk stays inside the
    bounds, so the data word enters them only through ``fit_data``: with
    ``saturate`` it changes no kept state (a clamped value lands on full scale,
    outside the bounds, as the unclamped one would), so the result is the same for
    every data width; with ``wrap`` a wrapped value may land inside the bounds, so
    the width is part of the key.  Everything else they read is in the key: the
    integer coefficients, rounding shift, bounds, rounding mode and accumulator
    width.
    """
    full = key + (arith.rounding, arith.acc_bits, arith.overflow,
                  arith.data.width if arith.overflow != "saturate" else None)
    if full in _GRANULAR_CACHE:
        return _GRANULAR_CACHE[full]
    out = search()
    if len(_GRANULAR_CACHE) >= 4096:
        _GRANULAR_CACHE.clear()
    _GRANULAR_CACHE[full] = out
    return out


def _describe(y1, y2, a1, a2, k, arith, cap: int = 4096):
    """Largest-amplitude cycle among the given cycle states."""
    amp = np.maximum(np.abs(y1), np.abs(y2))
    order = np.argsort(-amp)[:cap]
    best = None
    done = set()
    for i in order:
        s = (int(y1[i]), int(y2[i]))
        if s in done:
            continue
        per, am, cyc = _walk(s[0], s[1], a1, a2, k, arith)
        done.update(cyc)
        if per and (best is None or am > best[1]):
            start = max(cyc, key=lambda p: abs(p[0]))
            best = (per, am, start)
        if best is not None and best[1] >= amp[order[0]]:
            break
    per, am, start = best
    return Cycle(int(am), int(per), tuple(int(v) for v in start))


def _sampled(a1, a2, k, arith, B, starts, steps, seed, ef=False):
    """Run random states inside the bound (with a random residual E for df1ef); return
    the largest cycle they settle in, if any."""
    if arith.acc_bits > 64:
        return None
    rng = np.random.default_rng(seed)
    y1 = rng.integers(-B, B + 1, starts).astype(np.int64)
    y2 = rng.integers(-B, B + 1, starts).astype(np.int64) if a2 else np.zeros(starts, np.int64)
    e = (rng.integers(-(1 << (k - 1)), 1 << (k - 1), starts).astype(np.int64) if ef
         else np.zeros_like(y1))
    y1, y2, e, _ = run_zero_input(y1, y2, e, a1, a2, k, arith, ef, 2 if a2 else 1, steps)
    alive = (y1 != 0) | (y2 != 0)
    if not np.any(alive):
        return None
    states = zip(y1[alive].tolist(), y2[alive].tolist(), e[alive].tolist()) if ef else \
        zip(y1[alive].tolist(), y2[alive].tolist())
    finals = sorted(set(states), key=lambda p: -max(abs(p[0]), abs(p[1])))
    best = None
    for s in finals[:8]:
        if ef:
            per, am, cyc = _walk_ef(s[0], s[1], s[2], a1, a2, k, arith, 4 * steps)
        else:
            per, am, cyc = _walk(s[0], s[1], a1, a2, k, arith, limit=4 * steps)
        if per and am and (best is None or am > best[1]):
            best = (per, am, max(cyc, key=lambda p: abs(p[0])))
    if best is None:
        return None
    return Cycle(int(best[1]), int(best[0]), tuple(int(v) for v in best[2]))


def step_ef_int(y1: int, y2: int, e: int, a1: int, a2: int, k: int, arith: Arithmetic) -> tuple[int, int]:
    """Zero-input df1ef step in exact integers: (y[n], new residual E)."""
    acc = fit_word(-a1 * y1 - a2 * y2 + e, arith.acc_bits, "wrap")
    v = round_shift(acc, k, arith.rounding)
    return fit_word(v, arith.data.width, arith.overflow), acc - (v << k)


def zero_input_step_ef(y1, y2, e, a1: int, a2: int, k: int, arith: Arithmetic):
    """One zero-input df1ef step on int64 arrays (accumulators up to 64 bits): (y, E)."""
    acc = -(np.int64(a1) * y1) - (np.int64(a2) * y2) + e
    if arith.acc_bits < 64:
        acc = fit_word(acc, arith.acc_bits, "wrap")
    v = round_shift(acc, k, arith.rounding)
    return fit_word(v, arith.data.width, arith.overflow), acc - np.left_shift(v, k)


def _walk_ef(y1, y2, e, a1, a2, k, arith, limit):
    """Follow a df1ef state until it repeats: (period, amplitude, states on the cycle)."""
    cyc = _compiled_walk(y1, y2, e, a1, a2, k, arith, limit, True)
    if cyc is None:
        return None, None, []
    if cyc:
        return len(cyc), max(abs(p[0]) for p in cyc), cyc
    return _walk_ef_python(y1, y2, e, a1, a2, k, arith, limit)


def _walk_ef_python(y1, y2, e, a1, a2, k, arith, limit):
    """:func:`_walk_ef` in Python integers (the reference)."""
    return _walk_states((y1, y2, e), lambda a, b, c: step_ef_int(a, b, c, a1, a2, k, arith), limit)


def run_zero_input(y1, y2, e, a1: int, a2: int, k: int, arith: Arithmetic, ef: bool, order: int, steps: int,
                   tail: int = 0, gran: float | None = None, *, engine: bool = True):
    """Run int64 states through ``steps + tail`` zero-input steps: ``(y1, y2, e, big)``.

    df1/tdf2 use :func:`zero_input_step`, df1ef (*ef*) :func:`zero_input_step_ef`
    with the residuals *e*; ``y2`` takes the old ``y1`` (second order) or stays 0.
    Over the last *tail* steps ``big`` collects the peak ``|y1|`` of every state.
    With *gran*, every 64 steps (before the tail) the run stops as soon as every
    ``|y1|`` and ``|y2|`` is within *gran*.  The compiled core does the same
    integer steps (accumulators up to 64 bits, ``1 <= k <= 62``); with
    ``engine=False``, or outside its range, the numpy steps here (the reference).
    """
    y1 = np.array(y1, dtype=np.int64)
    y2 = np.array(y2, dtype=np.int64)
    e = np.array(e, dtype=np.int64)
    big = np.zeros(len(y1))
    if engine and _zero_input_engine() is not None and arith.acc_bits <= 64 and 1 <= k <= 62 \
            and -(1 << 63) <= a1 < 1 << 63 and -(1 << 63) <= a2 < 1 << 63:
        from ..simulate import _OVF_CODE, _ROUND_CODE

        _zero_input_engine()(y1, y2, e, big, int(a1), int(a2), int(k), arith.acc_bits, _ROUND_CODE[arith.rounding],
                             _OVF_CODE[arith.overflow], arith.data.width, int(bool(ef)), int(order == 2),
                             int(steps), int(tail), int(gran is not None), float(0.0 if gran is None else gran))
        return y1, y2, e, big
    for i in range(steps + tail):
        if ef:
            y0, e = zero_input_step_ef(y1, y2, e, a1, a2, k, arith)
        else:
            y0 = zero_input_step(y1, y2, a1, a2, k, arith)
        y1, y2 = y0, (y1 if order == 2 else np.zeros_like(y1))
        if i >= steps:
            big = np.maximum(big, np.abs(y1).astype(float))
        elif gran is not None and i % 64 == 63 and max(int(np.max(np.abs(y1))), int(np.max(np.abs(y2)))) <= gran:
            break
    return y1, y2, e, big


def _zero_input_engine():
    """The compiled zero-input stepper, or ``None`` without the compiled core."""
    from ..simulate import HAVE_ENGINE, _engine

    return getattr(_engine, "zero_input", None) if HAVE_ENGINE else None


def overflow_reach(a1: int, a2: int, k: int, arith: Arithmetic, order: int, ef: bool = False) -> tuple[bool, str]:
    """Can one zero-input step overflow from any state of the data-word box?  ``(can, detail)``.

    Exact: the accumulator ``-A1*y1 - A2*y2 (+ E)`` is extreme at a corner of the box
    (and at an end of the residual range for ``df1ef``), every rounding mode is
    monotone, so the rounded extremes bound every next output.  ``can`` is False
    only when both fit the data word and the accumulator never wraps.
    """
    lo, hi = arith.data.min_int, arith.data.max_int
    terms = [(-a1 * lo, -a1 * hi)] + ([(-a2 * lo, -a2 * hi)] if order == 2 else [])
    if ef and k >= 1:
        terms.append(_residual_range(k, arith.rounding))
    amax = sum(max(t) for t in terms)
    amin = sum(min(t) for t in terms)
    top = 1 << (arith.acc_bits - 1)
    if amax >= top or amin < -top:
        return True, f"the accumulator can wrap ({amin}..{amax} outside {arith.acc_bits} bits)"
    rmax, rmin = round_shift(amax, k, arith.rounding), round_shift(amin, k, arith.rounding)
    detail = (f"over every state of the data word the rounded accumulator spans {rmin}..{rmax} LSB "
              f"against the word's {lo}..{hi}")
    return (rmax > hi or rmin < lo), detail


def whole_space_cycles(a1: int, a2: int, k: int, arith: Arithmetic, order: int, ef: bool = False,
                       max_states: int = MAX_WHOLE_STATES, *, engine: bool = True) -> WholeSpace | None:
    """Every cycle of the zero-input map over the whole state space, exactly; ``None`` if too large.

    The states are ``(y1, y2)`` over the data-word box (``y1`` alone for a first-order
    section) and, for ``df1ef``, every residual ``E`` of the rounding mode.  The
    compiled core visits every state once (functional-graph cycle detection, as in
    :func:`cycle_states`) and sorts the cycles into those that pass through an
    overflow (``fit_data`` or the accumulator wrap changed a value on the way) and
    those that do not; without it, :func:`whole_space_cycles_numpy` (same result).
    Returns ``{"states", "granular", "overflow"}`` with, for each kind, ``None`` or the
    largest cycle's ``amplitude_lsb``, ``period`` and ``start_state`` (ties: the cycle,
    then the state, of smallest index ``((y1 - lo) 2^W + (y2 - lo)) ne + (E - Elo)``).

    References
    ----------
    D. E. Knuth, *The Art of Computer Programming*, vol. 2, 3rd ed., sec. 3.1, exercise 6.
    """
    from ..simulate import _OVF_CODE, _ROUND_CODE, _engine

    W = arith.data.width
    size = _whole_space(a1, a2, k, arith, order, ef, max_states)
    if size is None:
        return None
    n, elo, ehi = size
    if not (engine and _engine_fits(a1, a2, k, arith) and hasattr(_engine, "whole_cycles") and W <= 30):
        return whole_space_cycles_numpy(a1, a2, k, arith, order, ef, max_states)
    got = _engine.whole_cycles(int(a1), int(a2) if order == 2 else 0, int(k), arith.acc_bits,
                               _ROUND_CODE[arith.rounding], _OVF_CODE[arith.overflow], W, int(order == 2),
                               int(bool(ef)), int(elo), int(ehi), int(max_states))
    def cycle(hit):
        if hit is None:
            return None
        amp, per, y1, y2, e = hit
        return Cycle(int(amp), int(per), (int(y1), int(y2)) + ((int(e),) if ef else ()))

    return WholeSpace(int(got[0]), cycle(got[1]), cycle(got[2]))


def _whole_space(a1: int, a2: int, k: int, arith: Arithmetic, order: int, ef: bool,
                 max_states: int) -> tuple[int, int, int] | None:
    """``(states, lowest residual, highest residual)`` of the whole zero-input map, or
    ``None`` when it is too large to enumerate or its arithmetic leaves int64."""
    ny = 1 << arith.data.width
    elo, ehi = _residual_range(k, arith.rounding) if ef else (0, 0)
    ne = ehi - elo + 1
    n = ny ** order * ne
    if (n > max_states or arith.acc_bits > 64 or (ef and k < 1) or k > 62
            or (abs(a1) + abs(a2)) * ny + 2 * ne >= 1 << 62):
        return None
    return n, elo, ehi


def whole_space_cycles_numpy(a1: int, a2: int, k: int, arith: Arithmetic, order: int, ef: bool = False,
                             max_states: int = MAX_WHOLE_STATES) -> WholeSpace | None:
    """Every cycle of the zero-input map over the whole state space, exactly; ``None`` if too large.

    The states are ``(y1, y2)`` over the data-word box (``y1`` alone for a first-order
    section) and, for ``df1ef``, every residual ``E`` of the rounding mode.  Each state
    is mapped once; ``f^(2^J)`` with ``2^J`` at least the number of states (pointer
    doubling: ``g <- g[g]``) lands every state on a cycle, so its image is exactly the
    set of states on cycles.  Cycles are labelled by the smallest index on them (again
    by doubling) and split into those that pass through an overflow (``fit_data`` or
    the accumulator wrap changed a value on the way) and those that do not.  Returns
    ``{"states", "granular", "overflow"}`` with, for each kind, ``None`` or the largest
    cycle's ``amplitude_lsb``, ``period`` and ``start_state``.
    """
    W = arith.data.width
    lo = arith.data.min_int
    ny = 1 << W
    size = _whole_space(a1, a2, k, arith, order, ef, max_states)
    if size is None:
        return None
    n, elo, ehi = size
    ne = ehi - elo + 1
    idx = np.arange(n, dtype=np.int64)
    e = idx % ne + elo
    rest = idx // ne
    if order == 2:
        y1, y2 = rest // ny + lo, rest % ny + lo
    else:
        y1, y2 = rest + lo, np.zeros(n, dtype=np.int64)
    exact = -np.int64(a1) * y1 - np.int64(a2) * y2 + e
    acc = fit_word(exact, arith.acc_bits, "wrap") if arith.acc_bits < 64 else exact
    v = _round_shift64(acc, k, arith.rounding) if k >= 1 else round_shift(acc, k, arith.rounding)
    y0 = fit_word(v, W, arith.overflow)
    ovf = (y0 != v) | (acc != exact)
    e_new = (acc - np.left_shift(v, k) - elo) if ef else np.zeros(n, dtype=np.int64)
    nxt = ((y0 - lo) * ny + (y1 - lo) if order == 2 else (y0 - lo)) * ne + e_new
    nxt = nxt.astype(np.int32 if n < 1 << 31 else np.int64)
    del exact, acc, v, e, rest
    g = nxt
    for _ in range(n.bit_length()):
        g = g[g]
    cyc = np.unique(g)
    del g
    # label every cycle by the smallest position on it
    succ = np.searchsorted(cyc, nxt[cyc])
    lab = np.arange(len(cyc))
    h = succ
    for _ in range(max(1, len(cyc).bit_length())):
        lab = np.minimum(lab, lab[h])
        h = h[h]
    amp_state = np.abs(y1[cyc])
    period = np.bincount(lab, minlength=len(cyc))
    amp = np.zeros(len(cyc), dtype=np.int64)
    np.maximum.at(amp, lab, amp_state)
    has_ovf = np.bincount(lab, weights=ovf[cyc].astype(float), minlength=len(cyc)) > 0
    out = {"states": n, "granular": None, "overflow": None}
    for kind, sel in (("granular", ~has_ovf), ("overflow", has_ovf)):
        roots = np.flatnonzero(sel & (period > 0) & (amp > 0))
        if len(roots) == 0:
            continue
        r = int(roots[np.argmax(amp[roots])])
        members = np.flatnonzero(lab == r)
        j = int(cyc[members[np.argmax(amp_state[members])]])
        st = (int(y1[j]), int(y2[j])) + ((int(j % ne + elo),) if ef else ())
        out[kind] = Cycle(int(amp[r]), int(period[r]), st)
    return WholeSpace(int(n), out["granular"], out["overflow"])


_WHOLE_CACHE: dict = {}


def _whole_cached(a1, a2, k, arith, order, ef):
    key = (a1, a2, k, order, ef, arith.data.width, arith.acc_bits, arith.rounding, arith.overflow)
    if key not in _WHOLE_CACHE:
        if len(_WHOLE_CACHE) >= 256:
            _WHOLE_CACHE.clear()
        _WHOLE_CACHE[key] = whole_space_cycles(a1, a2, k, arith, order, ef)
    return _WHOLE_CACHE[key]


def _overflow(a1, a2, k, a_phys, arith, order, bounds, starts, seed, ef=False, whole=None) -> OverflowVerdict:
    """Overflow-oscillation verdict of one section."""
    a2 = a2 if order == 2 else 0
    can, detail = overflow_reach(a1, a2, k, arith, order, ef)
    emt = abs(a_phys[1]) + abs(a_phys[2])
    if not can:
        return OverflowVerdict("none",
                               note=f"no zero-input step can overflow: {detail} (exact, rounding included), so "
                                    "every cycle lies inside the granular bound")
    if whole is not None:
        hit = whole.overflow
        if hit is None:
            return OverflowVerdict("none", f"exhaustive search of all {whole.states} states of the zero-input "
                                   "map: no cycle passes through an overflow")
        return OverflowVerdict("found", f"zero-input overflow oscillation from state {hit.start_state} "
                                        f"(exhaustive search of all {whole.states} states)",
                               amplitude=hit.amplitude_lsb / (arith.data.max_int + 1),
                               period=hit.period, start=hit.start_state)
    why = (f"overflow is possible ({detail}"
           + (f"; |a1| + |a2| = {emt:.6g} < 1, but the rounding reaches full scale" if emt < 1 else "")
           + f"), and the {arith.data.width}-bit state space is too large to search exhaustively")
    if arith.acc_bits > 64:
        return OverflowVerdict("unproven", why + "; no large-state run for accumulators wider than 64 bits")
    lo, hi = arith.data.min_int, arith.data.max_int
    rng = np.random.default_rng(seed + 1)
    corners = np.array([(hi, hi), (hi, lo), (lo, hi), (lo, lo), (hi, 0), (lo, 0), (0, hi), (0, lo)], dtype=np.int64)
    rnd = rng.integers(lo, hi + 1, size=(starts, 2), dtype=np.int64)
    st = np.vstack([corners, rnd])
    y1, y2 = st[:, 0].copy(), st[:, 1].copy() if order == 2 else np.zeros(len(st), np.int64)
    e = np.zeros(len(st), dtype=np.int64)
    r = float(np.max(np.abs(np.roots(a_phys[: order + 1])))) if order else 0.0
    steps = int(min(8192, max(256, 40.0 / max(1e-6, 1.0 - r)))) if r < 1 else 1024
    gran = (bounds[0] if bounds else 0.0) + 1.0
    # after `steps` steps, 64 more record the peaks; every 64 steps before that, stop once every
    # trajectory is back inside the granular bound
    y1, y2, e, big = run_zero_input(y1, y2, e, a1, a2, k, arith, ef, order, steps, 64, gran)
    # settle the trajectory, then measure its period
    if ef:
        return _oscillation_verdict(big, gran, st, order, steps, hi, arith, why, lambda j: _walk_ef(
            int(y1[j]), int(y2[j]), int(e[j]), a1, a2, k, arith, 1 << 15))
    return _oscillation_verdict(big, gran, st, order, steps, hi, arith, why, lambda j: _walk(
        int(y1[j]), int(y2[j]), a1, a2, k, arith, limit=1 << 15))


def _oscillation_verdict(big, gran: float, st, order: int, steps: int, hi: int, arith: Arithmetic, why: str,
                         walk) -> OverflowVerdict:
    """The overflow-oscillation verdict of zero-input runs from large and full-scale states *st*.

    *big* is each run's largest output after *steps* steps.  ``unproven`` when no run stays
    above the granular bound *gran* (runs are not a proof) or when the largest one shows no
    period; otherwise ``found``, with that run's start state and the period ``walk(j)`` finds.
    """
    bad = np.nonzero(big > gran)[0]
    mode = "wrap-around" if arith.overflow == "wrap" else "saturation"
    if len(bad) == 0:
        return OverflowVerdict("unproven",
                               note=f"{why}; no oscillation from {len(st)} large and full-scale states in "
                                    f"{steps} steps ({mode}), which is not a proof")
    j = int(bad[np.argmax(big[bad])])
    s0 = (int(st[j, 0]), int(st[j, 1]) if order == 2 else 0)
    per, am, _cyc = walk(j)
    if not per or am <= gran:
        return OverflowVerdict("unproven",
                               note=f"{why}; from state {s0} the zero-input output is still "
                                    f"{big[j] / (hi + 1):.3g} of full scale after {steps} steps ({mode}) but no "
                                    "period was found: a very slow decay or a long oscillation")
    return OverflowVerdict("found",
                           note=f"zero-input overflow oscillation with {mode} from state {s0}",
                           amplitude=float(big[j]) / (hi + 1), period=per, start=s0)


def analyse_limit_cycles(program: ChannelProgram, *, max_states: int = MAX_STATES, **kw) -> LimitCycleAnalysis:
    """Verdicts for every recursive section of a fixed-point *program*, carried to the channel output."""
    ar = program.arithmetic
    if ar.is_float:
        return LimitCycleAnalysis(())
    out, numbers = [], []
    nsec = 0
    for i, op in enumerate(program.ops):
        if isinstance(op, SectionOp):
            nsec += 1
            if len(op.a) == 4:  # coupled (state-space) sections: coefc.analyse.coupled_cycles
                from .coupled_cycles import analyse_coupled

                res = analyse_coupled(op, i, ar)
                out.append(replace(res, at_output=_at_output(program, res)))
                numbers.append(nsec)
            elif int(op.a[0]) != 0 or int(op.a[1]) != 0 or any(int(v) for v in op.a_lo):
                res = _section_cached(op, i, ar, max_states, kw)
                out.append(replace(res, at_output=_at_output(program, res)))
                numbers.append(nsec)
    return LimitCycleAnalysis(tuple(out), tuple(numbers))


_SECTION_CACHE: dict = {}


def _section_cached(op: SectionOp, index: int, arith: Arithmetic, max_states: int, kw: dict) -> SectionLimitCycles:
    """:func:`analyse_section` of *op*, computed once per process for each distinct section.

    The verdicts of a (non-coupled) section read only its feedback words (``a``,
    ``a_lo``), coefficient shift and structure, and the arithmetic: never its
    numerator, which zero input does not reach.  So sections that realise their
    feedback identically -- the two equal sections of a Linkwitz-Riley crossover, a
    low-pass and a high-pass at one frequency, the same section in another channel or
    another configuration of a sweep -- share one analysis; only ``op_index`` is the
    section's own.  The key holds every input the analysis reads.
    """
    key = (tuple(int(v) for v in op.a), tuple(int(v) for v in op.a_lo), int(op.shift),
           op.structure or arith.structure, arith, int(max_states), tuple(sorted(kw.items())))
    hit = _SECTION_CACHE.get(key)
    if hit is None:
        hit = analyse_section(op, index, arith, max_states=max_states, **kw)
        if len(_SECTION_CACHE) >= 4096:
            _SECTION_CACHE.clear()
        _SECTION_CACHE[key] = hit
    return hit if hit.op_index == index else replace(hit, op_index=index)


def cycle_outputs(op: SectionOp, res: SectionLimitCycles, arith: Arithmetic) -> list[int]:
    """The outputs of one period of the granular cycle found in *res* (from its start state)."""
    if len(op.a) == 4:
        from .coupled_cycles import cycle_outputs as coupled_outputs

        return coupled_outputs(op, res.start_state, res.period, arith)
    a1, a2 = int(op.a[0]), int(op.a[1])
    k = arith.coef.frac_bits - op.shift
    st = res.start_state
    ys = []
    if len(st) == 3 and STRUCTURE_TABLE[op.structure or arith.structure].wide_feedback:
        y1, y2, e = st
        for _ in range(res.period):
            y0, e = step_ef_wide_int(y1, y2, e, _wide_words(op, arith), k, arith)
            ys.append(y0)
            y1, y2 = y0, y1
    elif len(st) == 3:
        y1, y2, e = st
        for _ in range(res.period):
            y0, e = step_ef_int(y1, y2, e, a1, a2, k, arith)
            ys.append(y0)
            y1, y2 = y0, y1
    elif STRUCTURE_TABLE[op.structure or arith.structure].wide_feedback:
        y1, y2 = st
        for _ in range(res.period):
            y0 = step_wide_int(y1, y2, op, k, arith)
            ys.append(y0)
            y1, y2 = y0, y1
    else:
        y1, y2 = st
        for _ in range(res.period):
            y0 = step_int(y1, y2, a1, a2, k, arith)
            ys.append(y0)
            y1, y2 = y0, y1
    return ys


def _at_output(program: ChannelProgram, res: SectionLimitCycles) -> AtOutput:
    """The section's cycle and bound carried through the rest of the channel.

    A found cycle's outputs, repeated, drive the later operations in the bit-true
    engine (from rest) until their slowest pole has settled; the largest output word
    over the last periods is the amplitude at the channel output.  The bound is the
    section's bound times the l1 gain of the later operations (realised
    coefficients) plus the worst-case roundoff of the later operations themselves.
    """
    from .linear import noise_impulses, op_models, pole_radius, response_length, tail_impulse

    rest = program.ops[res.op_index + 1:]
    if not rest:
        return AtOutput(res.amplitude_lsb, res.bound_lsb)
    ar = program.arithmetic
    models = op_models(program)
    tail = models[res.op_index + 1:]
    n = response_length(tail)
    notes = []
    bound = None
    stable_rest = pole_radius(tail) < 1.0
    if not stable_rest:
        notes.append("a later operation is not stable: no bound at the channel output")
    if res.bound_lsb is not None and stable_rest:
        # the program's own response length (at least the tail's when the program is stable), so that
        # every section and the noise analysis share one set of responses (coefc.analyse.linear)
        nb = max(n, response_length(models))
        h = tail_impulse(models, res.op_index + 1, nb)
        c, r = error_interval(ar.rounding)
        rnd = sum((abs(c) + r) * float(np.sum(np.abs(g)))
                  for j in range(res.op_index + 1, len(models)) if models[j].k > 0
                  for g in noise_impulses(models, j, nb))
        if np.all(np.isfinite(h)) and np.isfinite(rnd):
            bound = (res.bound_lsb * float(np.sum(np.abs(h))) + rnd) * (1 + 1e-9)  # l1 sums of decayed tails
    amp = None
    if res.amplitude_lsb and res.start_state is not None and res.period:
        from ..simulate import simulate

        op = program.ops[res.op_index]
        ys = cycle_outputs(op, res, ar)
        p = len(ys)
        settle = int(min(max(n, 4096), 1 << 20))
        reps = -(-(settle + 64 * p) // p)
        y = simulate(ChannelProgram(program.name, program.sample_rate_hz, ar, tuple(rest)),
                     np.tile(np.asarray(ys, dtype=np.int64), reps))
        last = y[-64 * p:]
        amp = int(np.max(np.abs(last)))
        if not np.array_equal(last[:p], last[-p:]):
            notes.append("the channel output was not yet periodic at the end of the run")
    return AtOutput(amp, bound, "; ".join(notes))
