"""Linear model of a realised program: a ChannelProgram in, float transfer functions out.

Every operation of a :class:`coefc.program.ChannelProgram` is modelled by the
physical value of its realised integers (``C * 2^(shift - Fc)``) and, where it
rounds, by an additive error source at its output (the linear noise model of
Jackson 1970).  From these the analysis computes impulse responses from the
channel input to every node, and from every rounding node to the channel output.

Structures (the recurrences are those of :mod:`coefc.program`):

``df1``    the rounding error ``e`` enters ``y`` and is fed back: ``E -> Y`` is ``1/A(z)``.
``tdf2``   the output is rounded once and fed back through the states; the states
           are kept at accumulator precision, so ``E -> Y`` is ``1/A(z)`` as well.
``df1ef``  DF1 with first-order error feedback: the residual of the last rounding is
           added back before the next, so ``E -> Y`` is ``(1 - z^-1)/A(z)``.
``df1-wide-fb``  DF1 with double-word feedback: as ``df1`` (``1/A(z)``, ``A`` with the
           low words), plus a second source at the same node: ``floor(P / 2^L)``
           drops a fraction ``f`` in ``[0, 1)`` of an accumulator LSB (steps of
           ``2^-L``), i.e. ``+f 2^-k`` output LSB with mean ``(1 - 2^-L)/2 * 2^-k`` and
           variance ``(1 - 2^-2L)/12 * 2^-2k`` (uniform on its grid, taken
           independent of the rounding error; the model of Jackson 1970 applied to
           the extra quantiser).  ``extra_mean``/``extra_var`` carry it.
``df1ef-wide-fb``  both: the rounding error is fed back, ``E -> Y`` is
           ``(1 - z^-1)/A(z)`` as for ``df1ef``; the floor of the low products
           happens before the accumulator whose residual is fed back, so its
           fraction is never fed back: a second source with the statistics above
           whose transfer is the unshaped ``1/A(z)`` (``extra_noise_b = [1]``).  Near
           z = 1 that source, ``2^-k`` times smaller than the rounding, can dominate:
           ``1/A(z)`` has the large DC gain that ``1 - z^-1`` removes from the rounding.
``df1ef-wide``  as ``df1ef-wide-fb`` with a double-word numerator: ``floor(Q / 2^L)``
           of the numerator's low products drops a fraction ``g`` in ``[0, 1)``
           too, an input-side source at the same node, never fed back (unshaped,
           ``1/A(z)``), of the same variance and opposite mean (``-g``: the floored
           term is added); taken independent of the feedback floor, the two add to
           one unshaped source of twice the variance and mean about zero.
``coupled`` three rounding points (:mod:`coefc.program`): the output rounding reaches
           ``y`` directly (``E0 -> Y`` is 1); the rounding of state ``j`` enters
           ``s[n+1]`` and reaches ``y`` through ``C (zI - A)^-1 e_j``:
           ``E1 -> Y = (C1 z^-1 + (C2 A21 - C1 A22) z^-2)/A(z)``,
           ``E2 -> Y = (C2 z^-1 + (C1 A12 - C2 A11) z^-2)/A(z)``.  The two states are
           internal nodes (data words): ``X -> S1 = G (z^-1 - A22 z^-2)/A(z)``,
           ``X -> S2 = G A21 z^-2/A(z)``; state ``j``'s rounding reaches state ``i``
           through entry ``(i, j)`` of ``z^-1 (I - A z^-1)^-1``.

References
----------
L. B. Jackson, "Roundoff-noise analysis for fixed-point digital filters realized in
cascade or parallel form", IEEE Trans. Audio Electroacoust. AU-18(2), 1970.
C. T. Mullis and R. A. Roberts, "Synthesis of minimum roundoff noise fixed point
digital filters", IEEE Trans. Circuits Syst. CAS-23(9), 1976 (state-space noise
transfer ``C (zI - A)^-1``; from memory).
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from fractions import Fraction

import numpy as np

from ..blocks import impulse_length
from ..program import (RATE_OPS, ChannelProgram, CicOp, DelayOp, FirOp, GainOp, PolyFirOp, RateOp, SectionOp,
                       STRUCTURE_TABLE, lo_bits, section_transfer)



@dataclass(frozen=True, eq=False)
class OpModel:
    """One operation as a linear system plus its rounding source.

    ``b``/``a`` are the physical transfer function of the operation; ``noise_b``/
    ``noise_a`` the transfer from its rounding error to its output.  ``k`` is the
    number of fractional bits the rounding drops (0: the operation is exact);
    ``full_scale`` and ``acc_full_scale`` are the largest magnitudes (physical
    units) of its output word and of its accumulator.
    """

    index: int  # 0-based position in program.ops
    kind: str  # "section", "fir", "gain", "delay", "polyfir", "rate", "cic"
    b: np.ndarray
    a: np.ndarray
    noise_b: np.ndarray
    noise_a: np.ndarray
    k: int
    full_scale: float
    acc_full_scale: float | None
    structure: str = ""
    extra_mean: float = 0.0  # a second error source at the rounding node, output LSB (df1-wide-fb)
    extra_var: float = 0.0
    extra_noise_b: np.ndarray | None = None  # its transfer's numerator when not noise_b (df1ef-wide-fb: [1])
    # state-space sections (coupled): further rounding sources with the same k, their (b, a) to the
    # op output; the states as internal nodes, (b, a) from the op input; per state, (b, a) from
    # each state rounding to that state
    extra_noise: tuple = ()
    states: tuple = ()
    state_noise: tuple = ()

    @property
    def noise_paths(self) -> list:
        """``(b, a)`` from every rounding source of the op to its output (the first is ``noise_b/noise_a``)."""
        return [(self.noise_b, self.noise_a), *self.extra_noise]
    #: rounded products (``product_shift > 0``): one ``(mean, variance)`` in LSB (LSB^2) of the
    #: data word per product that is rounded; each enters where the accumulator is formed, so it
    #: reaches the output through ``1 / A(z)`` of the operation (never shaped by error feedback)
    product_noise: tuple = ()
    #: the largest total error of those products in one sample (LSB): sum of their worst cases
    product_bound: float = 0.0
    # multirate (coefc.program's polyfir and rate ops): b and a above are expanded to the rate of the
    # equivalent single-rate model, b(z^expand) (noble identities); down/up of a rate-changing op
    expand: int = 1
    down: int = 1
    up: int = 1

    @property
    def recursive(self) -> bool:
        return len(self.a) > 1 and bool(np.any(self.a[1:] != 0))

    @property
    def label(self) -> str:
        return f"op {self.index + 1} ({self.kind})"


def _v2(n: int) -> int:
    """2-adic valuation of a nonzero integer (how many times 2 divides it)."""
    n = abs(int(n))
    return (n & -n).bit_length() - 1


def effective_drop(coefs, k: int) -> int:
    """Bits a ``round_shift(acc, k)`` really drops when every product is ``C * x``.

    When every integer coefficient is a multiple of ``2^m`` the accumulator's low
    ``m`` bits are always zero and only ``k - m`` bits are rounded away.
    """
    nz = [int(c) for c in coefs if int(c) != 0]
    if not nz or k <= 0:
        return 0
    return max(0, k - min(_v2(c) for c in nz))


def _product_stats(d: int, kf: int, mode: str) -> tuple[float, float]:
    """Mean and variance (data LSB, LSB^2) of one product that drops *d* bits by *mode*, in an
    accumulator whose unit is ``2^-kf`` LSB (the product's quantum ``2^P`` over the final shift)."""
    from .noise import rounding_error_stats

    mu, s2 = rounding_error_stats(d, mode)
    scale = 2.0 ** -kf
    return mu * scale, s2 * scale * scale


#: the models of the last few programs, and the responses computed from them (see :func:`op_models`)
_MODELS: dict = {}
_RESPONSES: dict = {}
_KEEP = 4


def op_models(program: ChannelProgram) -> list[OpModel]:
    """Linear models of every operation of *program*, in signal order.

    Built once per program object and shared by the noise, overflow and
    limit-cycle analyses (each call returns a new list of the same models); the
    impulse responses derived from them (:func:`node_impulses`,
    :func:`noise_impulse`) are likewise computed once per model list and length.
    """
    hit = _MODELS.get(id(program))
    if hit is not None and hit[0] is program:
        return list(hit[1])
    models = _build_models(program)
    if len(_MODELS) >= _KEEP:
        _MODELS.pop(next(iter(_MODELS)))
    _MODELS[id(program)] = (program, tuple(models))  # the program is kept alive, so its id stays its own
    return models


def _build_models(program: ChannelProgram) -> list[OpModel]:
    ar = program.arithmetic
    out: list[OpModel] = []
    if ar.is_float:
        fs_data, fc = float(np.finfo(np.float32).max), 0
    else:
        fs_data, fc = ar.data.max_value + ar.data.lsb, ar.coef.frac_bits

    def phys(c, shift):
        return float(c) * 2.0 ** (shift - fc) if not ar.is_float else float(c)  # float32: shift is 0

    def acc_fs(shift):
        if ar.is_float:
            return None
        # acc * 2^(shift + P - Fc - Fd) is the physical pre-rounding value (P: the product shift)
        return 2.0 ** (ar.acc_bits - 1 + shift + ar.product_shift - fc - ar.data.frac_bits)


    P = 0 if ar.is_float else ar.product_shift

    def drop(coefs, shift):
        """Bits the final rounding drops, and the (mean, variance) of each rounded product."""
        if ar.is_float:
            return 0, ()
        if not P:
            return effective_drop(coefs, fc - shift), ()
        kf = fc - shift - P
        nz = [int(c) for c in coefs if int(c) != 0]
        # a product C*x with 2^d | C drops only P - d bits (none when d >= P)
        prods = tuple(_product_stats(P - _v2(c), kf, ar.product_rounding) for c in nz if _v2(c) < P)
        if not prods:  # every product exact: the accumulator holds (C / 2^P) * x
            return effective_drop([c >> P for c in nz], kf), ()
        return max(0, kf), prods

    def pbound(coefs, shift):
        if ar.is_float or not P:
            return 0.0
        from .limitcycles import error_interval

        c, r = error_interval(ar.product_rounding)
        n = sum(1 for v in coefs if int(v) != 0 and _v2(v) < P)
        return n * (abs(c) + r) * 2.0 ** -(fc - shift - P)

    one = np.array([1.0])

    def single(op, i) -> OpModel:
        """The model of one single-rate op (sections of every structure, FIR, gain, delay)."""
        if isinstance(op, SectionOp) and STRUCTURE_TABLE[op.structure].state_space and not ar.is_float:
            bq, aq = section_transfer(op, fc)
            b, a = np.array(bq), np.array(aq)
            k = effective_drop(tuple(op.b) + tuple(op.a), fc - op.shift)
            d, c1, c2, g = (phys(c, op.shift) for c in op.b)
            a11, a12, a21, a22 = (phys(c, op.shift) for c in op.a)
            extra = ((np.array([0.0, c1, c2 * a21 - c1 * a22]), a), (np.array([0.0, c2, c1 * a12 - c2 * a11]), a))
            states = ((np.array([0.0, g, -g * a22]), a), (np.array([0.0, 0.0, g * a21]), a))
            snoise = (((np.array([0.0, 1.0, -a22]), a), (np.array([0.0, 0.0, a12]), a)),
                      ((np.array([0.0, 0.0, a21]), a), (np.array([0.0, 1.0, -a11]), a)))
            return OpModel(i, "section", b, a, one, one, k, fs_data, acc_fs(op.shift), op.structure,
                           extra_noise=extra, states=states, state_noise=snoise)
        elif isinstance(op, SectionOp):
            b = np.array(op.b_phys(ar.coef)) if op.b_lo and not ar.is_float else \
                np.array([phys(c, op.shift) for c in op.b])
            a = np.array([1.0] + list(op.a_phys(None if ar.is_float else ar.coef)))
            k, prods = drop(tuple(op.b) + tuple(op.a), op.shift)
            structure = op.structure or ar.structure
            wide_a = not ar.is_float and STRUCTURE_TABLE[structure].wide_feedback and any(op.a_lo)
            wide_b = not ar.is_float and STRUCTURE_TABLE[structure].wide_numerator and any(op.b_lo)
            wide = wide_a or wide_b
            if wide:  # floor(P / 2^L) of df1-wide-fb is any integer: every bit of the rounding shift is dropped
                k = effective_drop(tuple(op.b) + tuple(op.a) + (1,), fc - op.shift)
            nb = np.array([1.0, -1.0]) if STRUCTURE_TABLE[structure].error_feedback else one
            em = ev = 0.0
            if wide:
                L, kk = lo_bits(ar.coef), fc - op.shift
                m1 = 0.5 * (1.0 - 2.0 ** -L) * 2.0 ** -kk
                v1 = (1.0 - 2.0 ** (-2 * L)) / 12.0 * 2.0 ** (-2 * kk)
                # the feedback floor enters acc as +f (it is subtracted), the numerator floor as -g
                # (df1ef-wide, added): the means cancel, the variances add (taken independent)
                em = (m1 if wide_a else 0.0) - (m1 if wide_b else 0.0)
                ev = v1 * (int(wide_a) + int(wide_b))
            # df1ef-wide-fb, df1ef-wide: the floors are outside the fed-back residual, their errors are not shaped
            xb = one if wide and STRUCTURE_TABLE[structure].error_feedback else None
            return OpModel(i, "section", b, a, nb, a, k, fs_data, acc_fs(op.shift), structure, extra_mean=em,
                           extra_var=ev, extra_noise_b=xb, product_noise=prods,
                           product_bound=pbound(tuple(op.b) + tuple(op.a), op.shift))
        elif isinstance(op, FirOp):
            b = np.array([phys(c, op.shift) for c in op.taps])
            k, prods = drop(op.taps, op.shift)
            return OpModel(i, "fir", b, one, one, one, k, fs_data, acc_fs(op.shift), product_noise=prods,
                           product_bound=pbound(op.taps, op.shift))
        elif isinstance(op, GainOp):
            b = np.array([phys(op.coef, op.shift)])
            k, prods = drop((op.coef,), op.shift)
            return OpModel(i, "gain", b, one, one, one, k, fs_data, acc_fs(op.shift), product_noise=prods,
                           product_bound=pbound((op.coef,), op.shift))
        elif isinstance(op, DelayOp):
            b = np.zeros(op.samples + 1)
            b[-1] = 1.0
            return OpModel(i, "delay", b, one, one, one, 0, fs_data, None)
        else:  # pragma: no cover - program.Op is closed
            raise TypeError(f"unknown operation {op!r}")

    # A multirate channel is modelled by its equivalent single-rate model at the highest rate it
    # reaches: an op running at `top / e` by its polynomials in z^e (the noble identities,
    # Vaidyanathan 1993, sec. 4.2; from memory).  Exact for the signal path and the l1 bounds of
    # every node (each kept sample is one sample of the expanded node); a rounding error made at
    # the lower rate keeps its variance and mean through the expanded tail.
    rate, top = Fraction(1), Fraction(1)
    for op in program.ops:
        if isinstance(op, RATE_OPS):
            rate *= Fraction(op.up, op.down)
            top = max(top, rate)
    rate = Fraction(1)
    for i, op in enumerate(program.ops):
        if isinstance(op, CicOp):
            # a CIC decimator is exactly the polyphase FIR of coef * h (the modulo property,
            # coefc.program): its integrators and combs never round and never overflow (they wrap by
            # design and the comb output is exact), the one rounding is at the output rate, and the
            # product coef * v is exact (no accumulator to overflow: acc_full_scale None)
            pf = op.as_polyfir()
            b = np.array([phys(c, pf.shift) for c in pf.taps])
            k = effective_drop(pf.taps, fc - pf.shift)
            out.append(_expanded(OpModel(i, "cic", b, one, one, one, k, fs_data, None, down=op.down), int(top / rate)))
            rate /= op.down
            continue
        if isinstance(op, (PolyFirOp, RateOp)):
            taps_rate = rate if op.down > 1 else rate * op.up  # the prototype's rate: the higher one
            e = int(top / taps_rate)
            if isinstance(op, PolyFirOp):
                b = np.array([phys(c, op.shift) for c in op.taps])
                k = 0 if ar.is_float else effective_drop(op.taps, fc - op.shift)
                m = _expanded(OpModel(i, "polyfir", b, one, one, one, k, fs_data, acc_fs(op.shift),
                                      down=op.down, up=op.up), e)
            else:
                m = OpModel(i, "rate", one, one, one, one, 0, fs_data, None, down=op.down, up=op.up)
            out.append(m)
            rate *= Fraction(op.up, op.down)
            continue
        out.append(_expanded(single(op, i), int(top / rate)))
    return out


def _expanded(m: OpModel, e: int) -> OpModel:
    """*m* with its polynomials in ``z^e`` (an op at ``1/e`` of the model's rate)."""
    if e == 1:
        return m

    def ex(p):
        q = np.zeros((len(p) - 1) * e + 1)
        q[::e] = p
        return q

    return replace(m, b=ex(m.b), a=ex(m.a), noise_b=ex(m.noise_b), noise_a=ex(m.noise_a), expand=e)


def pole_radius(models: list[OpModel]) -> float:
    """Largest pole radius over all recursive operations (0 when there is none)."""
    r = 0.0
    for m in models:
        if m.recursive:
            r = max(r, float(np.max(np.abs(np.roots(m.a)))))
    return r


def response_length(models: list[OpModel]) -> int:
    """Impulse-response length that captures every node (:func:`coefc.blocks.impulse_length`)."""
    return impulse_length(pole_radius(models), sum(len(m.b) - 1 for m in models if not m.recursive))


def _run(b, a, x):
    from scipy import signal

    if len(a) == 1 and a[0] == 1.0:
        if len(b) == 1:
            return x * b[0]
        return signal.lfilter(b, [1.0], x) if len(b) < 64 else signal.oaconvolve(x, b)[: len(x)]
    return signal.lfilter(b, a, x)


def _responses(models: list[OpModel], n: int) -> dict:
    """The shared response store of one model list and length (read-only arrays inside)."""
    key = (tuple(id(m) for m in models), int(n))
    hit = _RESPONSES.get(key)
    if hit is None:
        if len(_RESPONSES) >= _KEEP:
            _RESPONSES.pop(next(iter(_RESPONSES)))
        hit = _RESPONSES[key] = {"models": tuple(models), "tails": {}, "noise": {}}
    return hit


def _frozen(a: np.ndarray) -> np.ndarray:
    a.setflags(write=False)
    return a


def node_impulses(models: list[OpModel], n: int) -> list[np.ndarray]:
    """Impulse response from the channel input to the output of every operation (read-only arrays)."""
    store = _responses(models, n)
    if "nodes" not in store:
        h = np.zeros(n)
        h[0] = 1.0
        out = []
        for m in models:
            h = _frozen(_run(m.b, m.a, h))
            out.append(h)
        store["nodes"] = out
    return list(store["nodes"])


def tail_impulse(models: list[OpModel], j: int, n: int) -> np.ndarray:
    """Impulse response of the operations ``models[j:]`` in cascade (a unit impulse for ``j = len``).

    The operations are linear and time-invariant, so the cascade from *j* on is
    operation *j* applied to the cascade from ``j + 1`` on: all tails together cost
    one filter run per operation (read-only arrays, kept per model list and length).
    """
    tails = _responses(models, n)["tails"]
    if j in tails:
        return tails[j]
    i = len(models)
    while i > j and (i - 1) in tails:
        i -= 1
    if i == len(models) and i not in tails:
        g = np.zeros(n)
        g[0] = 1.0
        tails[i] = _frozen(g)
    while i > j:
        i -= 1
        m = models[i]
        tails[i] = _frozen(_run(m.b, m.a, tails[i + 1]))
    return tails[j]


def noise_impulse(models: list[OpModel], j: int, n: int, source: int = 0) -> np.ndarray:
    """Impulse response from rounding source *source* of operation *j* to the channel output (read-only)."""
    noise = _responses(models, n)["noise"]
    key = j if source == 0 else (j, source)
    if key not in noise:
        nb, na = models[j].noise_paths[source]
        noise[key] = _frozen(_run(nb, na, tail_impulse(models, j + 1, n)))
    return noise[key]


def noise_impulses(models: list[OpModel], j: int, n: int) -> list[np.ndarray]:
    """Impulse responses from every rounding source of operation *j* to the channel output."""
    return [noise_impulse(models, j, n, s) for s in range(len(models[j].noise_paths))]


_L1_BOUNDS: dict = {}


def l1_key(m: OpModel) -> tuple | None:
    """The exact inputs of one op's step in the l1 bound of :func:`l1_bound_terms` (``None``: not shared).

    Ops with coupled states or rounded products are not shared (their bound has
    further terms); the op's position is not part of the key.
    """
    if m.states or m.product_bound or m.expand != 1 or m.kind == "delay":
        return None
    return (m.b.tobytes(), m.a.tobytes(), int(m.k > 0),
            tuple((np.asarray(nb, dtype=float).tobytes(), np.asarray(na, dtype=float).tobytes())
                  for nb, na in m.noise_paths))


def keep_l1_bound_terms(prefix: tuple, n: int, node_l1: float, path_l1: list[float]) -> None:
    """Record the l1 terms of the node after the ops of *prefix* (their :func:`l1_key`), responses of length *n*.

    *node_l1* is ``sum |h|`` of the node's impulse response from the channel input and
    *path_l1* ``sum |g_j|`` of the path from every rounding so far to the node, in
    the order the rounding ops come (each op's sources in :attr:`OpModel.noise_paths`
    order): the realiser's l1 scaling computes exactly these for the ops it keeps,
    and the overflow analysis's l1 promise (``coefc.analyse.overflow.internal_node_bounds``)
    needs the same for the same ops, so it reads them instead of filtering again.
    """
    if len(_L1_BOUNDS) >= 4096:
        _L1_BOUNDS.clear()
    _L1_BOUNDS[(int(n), prefix)] = (float(node_l1), tuple(float(v) for v in path_l1))


def l1_bound_terms(prefix: tuple, n: int) -> tuple[float, tuple[float, ...]] | None:
    """What :func:`keep_l1_bound_terms` recorded for these ops and length (``None`` if nothing)."""
    return _L1_BOUNDS.get((int(n), prefix))


def chain_filter(models: list[OpModel], x: np.ndarray) -> np.ndarray:
    """Float64 output of the realised coefficients for input *x* (no rounding).

    A multirate channel runs its equivalent single-rate model: the input
    upsampled (zeros between) by every interpolation factor, the expanded ops,
    then every decimation factor's samples kept -- the channel's output samples.
    """
    y = np.asarray(x, dtype=np.float64)
    up = int(np.prod([m.up for m in models])) if models else 1
    down = int(np.prod([m.down for m in models])) if models else 1
    if up > 1:
        u = np.zeros(len(y) * up)
        u[::up] = y
        y = u
    for m in models:
        y = _run(m.b, m.a, y)
    return y[::down] if down > 1 else y
