"""Overflow analysis: a ChannelProgram in, per-node peak gains, headroom and a worst-case test out.

For every node (the output word of each operation and, where it has one, its
accumulator) the peak gain from the channel input is given two ways:

* worst case, ``||h||_1 = sum |h[n]|``: the largest value any input bounded by
  full scale can produce (no input can overflow a node whose ``||h||_1`` fits);
* sinusoidal, ``||H||_inf = max |H(w)|``: the largest steady-state value of a
  full-scale sine.

Headroom in bits is ``log2(node full scale / peak)``, negative when a node can
overflow.  The worst-case input for a node is the sign pattern of its
time-reversed impulse response; driven through the bit-true engine it shows how
many overflow (saturation or wrap) events the chip really sees.  Its peak is the
largest input for which the float design's own output cannot exceed full scale
(full scale itself when the channel's ||h||_1 <= 1), so that a count above zero
is an overflow the fixed-point realisation adds; the same runs at full scale are
reported as well.  A peak below one LSB quantises to an input of all zeros, which
can show nothing: it counts as no safe level at all (``input_peak_lsb == 0``).

Peaks are fractions of full scale (or dB re full-scale peak), not AES17 dBFS,
which is an RMS level.

Under ``l1`` scaling the realisation promises that no internal node (the output
of every op but the last) overflows for any input within full scale.  The
promise is checked here on the realised integers, independently of the
realiser: for each internal node, the l1 norm of its realised response plus, for
every rounding up to and including that op, the rounding's largest error times
the l1 norm of its path to the node (``l1_worst``, physical units, against the
largest data word); the same full-scale worst-case runs count the events at
internal nodes (``internal_events_full_scale``).

References
----------
L. B. Jackson, "On the interaction of roundoff noise and dynamic range in digital
filters", Bell Syst. Tech. J. 49(2), 1970 (the l1 / L-infinity / L2 norms and
||F||_2 <= ||F||_inf <= sum |f|).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..program import ChannelProgram
from .linear import OpModel, _run, l1_bound_terms, l1_key, node_impulses, op_models, response_length


@dataclass(frozen=True)
class NodeGain:
    """Peak gains of one node (full scale of the input = 1.0)."""

    op_index: int  # 0-based
    node: str  # "output", "accumulator", or "state 1"/"state 2" (tdf2 states, accumulator width)
    l1: float
    linf: float
    full_scale: float
    headroom_bits: float  # log2(full_scale / l1); inf when the node never moves
    headroom_bits_sine: float  # log2(full_scale / linf)

    @property
    def label(self) -> str:
        return f"op {self.op_index + 1} {self.node}"


@dataclass(frozen=True)
class OverflowAnalysis:
    """Node gains and the bit-true worst-case runs."""

    nodes: tuple[NodeGain, ...]
    headroom_bits: float | None  # smallest worst-case headroom over all nodes
    headroom_bits_sine: float | None
    worst_node: str | None
    overflow_count: int | None  # events in the worst-case runs at the legal input peak (None: not run)
    runs: int  # worst-case sequences driven
    input_peak: float = 1.0  # peak of those runs, fraction of full scale
    output_peak_gain: float | None = None  # ||h||_1 from the input to the channel output (realised coefficients)
    overflow_count_full_scale: int | None = None  # the same runs at full scale
    l1_worst: float | None = None  # l1 scaling: largest internal-node bound (signal + roundoff)
    l1_worst_node: str | None = None
    l1_limit: float | None = None  # the largest data word (physical)
    internal_events_full_scale: int | None = None  # events at internal nodes in the full-scale runs
    input_peak_lsb: int | None = None  # the runs' peak as an integer input word (0: the input is all zeros)
    design_peak_gain: float | None = None  # ||h||_1 of the float design (set by analyse_channel)


def _headroom(fs: float, peak: float) -> float:
    return math.inf if peak <= 0 else math.log2(fs / peak)


def _node_responses(models: list[OpModel], impulses: list[np.ndarray]):
    """(op index, node name, impulse response from the channel input, full scale) of every node."""
    out = []
    prev = None
    for m, h in zip(models, impulses):
        out.append((m.index, "output", h, m.full_scale))
        if m.acc_full_scale is not None and m.kind != "delay":
            out.append((m.index, "accumulator", h, m.acc_full_scale))
            if m.kind == "section" and m.structure == "tdf2":
                x = prev if prev is not None else _unit(len(h))
                # S2 = b2 x - a2 y;  S1 = b1 x - a1 y + S2[n-1]  (program.py, tdf2)
                s2 = m.b[2] * x - m.a[2] * h
                s1 = m.b[1] * x - m.a[1] * h + np.concatenate([[0.0], s2[:-1]])
                out.append((m.index, "state 1", s1, m.acc_full_scale))
                out.append((m.index, "state 2", s2, m.acc_full_scale))
        for j, (sb, sa) in enumerate(m.states):  # coupled: the states are data words
            x = prev if prev is not None else _unit(len(h))
            out.append((m.index, f"state {j + 1}", _run(sb, sa, x), m.full_scale))
        prev = h
    return out


def _unit(n: int) -> np.ndarray:
    x = np.zeros(n)
    x[0] = 1.0
    return x


def node_gains(models: list[OpModel], impulses: list[np.ndarray]) -> list[NodeGain]:
    out = []
    norms: dict[int, tuple[float, float]] = {}  # an op's output and accumulator share one response
    for idx, name, h, fs in _node_responses(models, impulses):
        if id(h) not in norms:
            nfft = 1 << max(12, int(np.ceil(np.log2(len(h)))) + 2)
            norms[id(h)] = (float(np.sum(np.abs(h))), float(np.max(np.abs(np.fft.rfft(h, nfft)))))
        l1, linf = norms[id(h)]
        out.append(NodeGain(idx, name, l1, linf, fs, _headroom(fs, l1), _headroom(fs, linf)))
    return out


def worst_case_input(h: np.ndarray, peak_int: int, min_int: int) -> np.ndarray:
    """Full-scale sign pattern of the time-reversed impulse response *h* (int64)."""
    hr = h[::-1]
    x = np.where(hr >= 0, peak_int, min_int).astype(np.int64)
    x[hr == 0] = 0
    return x


def roundoff_bound_lsb(models: list[OpModel], n: int, rounding: str) -> float:
    """Largest roundoff error at the output, in LSB: sum of e_max * ||g_j||_1 over rounding nodes."""
    from .limitcycles import error_interval
    from .linear import noise_impulses

    c, r = error_interval(rounding)
    total = sum((abs(c) + r) * float(np.sum(np.abs(g))) for m in models if m.k > 0
                for g in noise_impulses(models, m.index, n))
    return total + sum(m.product_bound * float(np.sum(np.abs(_product_path(models, m, n))))
                       for m in models if m.product_bound)


def _product_path(models: list[OpModel], m: OpModel, n: int) -> np.ndarray:
    """Impulse response from the rounded products of *m* (entering at its accumulator) to the output."""
    from .linear import _run, tail_impulse

    return _run(np.array([1.0]), m.noise_a, tail_impulse(models, m.index + 1, n))


def internal_node_bounds(models: list[OpModel], imps: list[np.ndarray], n: int,
                         rounding: str, lsb: float) -> list[tuple[int, float, str]]:
    """``(op index, bound, node)`` of every internal op output (all but the last op).

    The bound is ``||h_i||_1 + sum_j e_max ||g_j->i||_1 * lsb`` over the rounding ops
    ``j <= i``: no input within full scale can drive the node past it (Jackson's l1
    argument, with the roundoff bounded instead of neglected).  The states of a
    coupled section are internal nodes too (of every op, the last included): their
    bound adds the paths of the earlier roundings through the op's state responses
    and of the op's own state roundings.
    """
    from .limitcycles import error_interval

    c, r = error_interval(rounding)
    eps = (abs(c) + r) * lsb
    last = max((m.index for m in models if m.kind != "delay"), default=-1)
    shared = _shared_bounds(models, n, eps, last)
    if shared is not None:
        return shared
    unit = np.zeros(n)
    unit[0] = 1.0
    paths: list[np.ndarray] = []
    out = []
    prev = unit
    for m, h in zip(models, imps):
        for j, (sb, sa) in enumerate(m.states):
            sig = float(np.sum(np.abs(_run(sb, sa, prev))))
            rnd = sum(w * float(np.sum(np.abs(_run(sb, sa, p)))) for w, p in paths)
            if m.k > 0:
                rnd += eps * sum(float(np.sum(np.abs(_run(nb, na, unit)))) for nb, na in m.state_noise[j])
            out.append((m.index, sig + rnd, f"state {j + 1}"))
        paths = [(w, _run(m.b, m.a, p)) for w, p in paths]
        if m.k > 0:
            paths.extend((eps, _run(nb, na, unit)) for nb, na in m.noise_paths)
        if m.product_bound:  # rounded products: each sample's worst total error, through 1/A(z)
            paths.append((m.product_bound * lsb, _run(np.array([1.0]), m.noise_a, unit)))
        prev = h
        if m.kind != "delay" and m.index != last:
            bound = float(np.sum(np.abs(h))) + sum(w * float(np.sum(np.abs(p))) for w, p in paths)
            if m.kind == "cic" and float(np.sum(m.b)) <= 1.0:
                # a CIC's input is a data word whatever came before, its exact output is the FIR of
                # non-negative taps of sum C (R D)^N / 2^k <= 1 (coefc.program, "cic"), so it lies in
                # [-fs, fs - lsb]; rounding is monotone and keeps integers: its output is always a data word,
                # never saturated, for any input (the largest positive value is the largest data word)
                bound = min(bound, m.full_scale - lsb)
            out.append((m.index, bound, "output"))
    return out


def _shared_bounds(models: list[OpModel], n: int, eps: float, last: int) -> list | None:
    """:func:`internal_node_bounds` from the l1 sums the realiser computed for the same ops, or ``None``.

    The l1 realisation (``coefc.realise``) filters exactly these responses and paths
    for the ops it keeps and records their sums (:func:`coefc.analyse.linear.keep_l1_bound_terms`,
    keyed by every op's exact coefficients and the response length); each bound here is
    the same expression of the same sums, so the figures are identical.  ``None`` when
    any internal node was not recorded (another realisation, a delay first, coupled
    sections, rounded products): then everything is filtered here.
    """
    prefix: tuple = ()
    out = []
    for m in models:
        key = l1_key(m)
        if key is None:
            return None
        prefix += (key,)
        if m.index != last:
            hit = l1_bound_terms(prefix, n)
            if hit is None:
                return None
            node_l1, path_l1 = hit
            out.append((m.index, node_l1 + sum(eps * v for v in path_l1), "output"))
    return out


def analyse_overflow(program: ChannelProgram, *, run_engine: bool = True,
                     models: list[OpModel] | None = None, n: int | None = None,
                     max_runs: int = 16) -> OverflowAnalysis:
    """Peak gains of every node and overflow events under worst-case inputs.

    One worst-case sequence is driven per distinct node (up to *max_runs*, worst
    headroom first).  Its peak is the largest for which the channel's own output
    cannot pass full scale -- ``(1 - roundoff bound) / ||h_out||_1``, or full scale
    when that is larger -- so every event counted is an overflow the realisation
    adds, not one the design itself asks for; ``overflow_count`` adds up the
    saturation/wrap events (``Trace.overflow_counts``) and accumulator wraps
    (``Trace.acc_overflow_counts``) of every operation over those runs.  The same
    runs at full scale give ``overflow_count_full_scale``.
    """
    ar = program.arithmetic
    models = models if models is not None else op_models(program)
    n = n or response_length(models)
    imps = node_impulses(models, n)
    nodes = node_gains(models, imps)
    if not nodes:
        return OverflowAnalysis((), None, None, None, 0, 0)
    worst = min(nodes, key=lambda g: g.headroom_bits)
    hb = min(g.headroom_bits for g in nodes)
    hs = min(g.headroom_bits_sine for g in nodes)
    out_gain = float(np.sum(np.abs(imps[-1]))) if imps else None
    count = full = internal = None
    l1w = l1node = l1lim = None
    if ar.scaling == "l1" and not ar.is_float:
        bounds = internal_node_bounds(models, imps, n, ar.rounding, ar.data.lsb)
        if bounds:
            i, l1w, node = max(bounds, key=lambda t: t[1])
            l1node, l1lim = f"op {i + 1} {node}", ar.data.max_value
    last = max((m.index for m in models if m.kind != "delay"), default=-1)
    runs = 0
    peak = 1.0
    peak_lsb = None
    if run_engine and not ar.is_float:
        from ..simulate import simulate

        fs_out = models[-1].full_scale
        margin = roundoff_bound_lsb(models, n, ar.rounding) * ar.data.lsb
        if out_gain and out_gain * (1.0 + margin) > fs_out:
            peak = max(0.0, (fs_out - margin) / out_gain)
        # the integer peak of the runs: 0 means the test input quantises to all zeros
        peak_lsb = ar.data.max_int if peak >= 1.0 else int(np.floor(peak * ar.data.max_int))
        count = full = internal = 0
        done = set()
        resp = {(i, name): h for i, name, h, _ in _node_responses(models, imps)}
        for g in sorted(nodes, key=lambda g: g.headroom_bits):
            key = (g.op_index, "output" if g.node == "accumulator" else g.node)
            if key in done or runs >= max_runs:
                continue
            done.add(key)
            h = resp[(g.op_index, g.node)]
            # trim the negligible tail: the sign of a 1e-13 term changes nothing that matters
            nz = np.nonzero(np.abs(h) > 1e-12 * np.max(np.abs(h)))[0] if np.any(h) else []
            if len(nz) == 0:
                continue
            h = h[: nz[-1] + 1]
            for amp in ((peak, 1.0) if peak < 1.0 else (1.0,)):
                hi = int(np.floor(amp * ar.data.max_int))
                lo = ar.data.min_int if amp >= 1.0 else -hi
                x = worst_case_input(h, hi, lo)
                x = np.concatenate([x, np.zeros(64, dtype=np.int64)])
                tr = simulate(program, x, trace=True)
                ev = int(sum(int(c) for c in tr.overflow_counts)) + int(sum(int(c) for c in tr.acc_overflow_counts))
                if amp == peak:
                    count += ev
                if amp == 1.0:
                    full += ev
                    internal += int(sum(int(c) for j, c in enumerate(tr.overflow_counts) if j != last))
            runs += 1
    elif ar.is_float:
        count = full = 0  # float32 words do not overflow below 3.4e38
    return OverflowAnalysis(tuple(nodes), _finite(hb), _finite(hs), worst.label, count, runs, peak, out_gain, full,
                            l1w, l1node, l1lim, internal, peak_lsb)


def _finite(v: float) -> float | None:
    return v if math.isfinite(v) else None
