"""Word-length trade-offs: a design, a budget and ranges of word lengths in, a table out.

For every configuration (target x structure x accumulator x data word x coefficient
word) the channel is realised and analysed exactly as ``coefc check`` does, and the
key metrics are compared with the budget.  The float design is made once and shared
by every configuration; nothing that does not depend on the word lengths is redone.

Word lengths are total widths in bits (sign included).  The integer part of each Q
format stays what the target (or the description) uses, so with a target whose
coefficients are Q2.30, ``--coef 16`` means Q2.14.

Cost of a configuration, used to mark the cheapest passing one: the number of data
plus coefficient bits, ties broken by the memory the channel needs (coefficient and
state words, each in the smallest standard container of 8, 16, 32 or 64 bits).

:func:`fewest_bits` finds the smallest passing word lengths per channel exactly as
the whole grid would: it evaluates the grid's points in order of cost (data plus
coefficient bits, then data bits) and stops at the first that passes, so every
cheaper point has been seen to fail.  No monotonicity is assumed: the verdict is
not monotone in general (coefficient quantisation can pass by luck at one width and
fail at the next, and a data word that reaches the accumulator width fails where a
narrower one passes), and a walk that assumes it can miss the answer or find none.
:mod:`coefc.explore.opwidths` refines the result per operation (section, FIR, gain).

Only configurations ``coefc build`` accepts are offered: a width beyond what the
target's kernel computes is skipped with the reason before any work, and a
realisation the kernel cannot run (:func:`coefc.emit.buildable.validate`: rounding
shifts, coefficient words in the target's layout, ...) is skipped after realising.
Default ranges stay inside each target's ``[limits]``.

References
----------
Cost-ordered exhaustive search (best-first over a finite grid, stopping at the
first goal): S. Russell and P. Norvig, *Artificial Intelligence: A Modern
Approach*, 3rd ed., sec. 3.4.2, uniform-cost search (from memory).
"""

from __future__ import annotations

import itertools
import math
import os
import re
import signal
from collections.abc import Callable, Iterable, Sequence
from dataclasses import dataclass, field

from ..budget import CheckReport, run_check
from ..errors import DescriptionError
from ..program import ChannelProgram, DelayOp, FirOp, GainOp, PolyFirOp, SectionOp, STRUCTURE_TABLE
from ..qformat import QFormat
from ..spec import Budget
from ..targetspec import Overrides

METRICS = (
    ("passband_deviation_db", "max"),
    ("stopband_attenuation_db", "min"),
    ("output_noise_dbfs", "max"),
    ("headroom_bits", "min"),
)

_RANGE_RE = re.compile(r"^\s*(\d+)\s*:\s*(\d+)\s*(?::\s*(\d+)\s*)?$")


#: Largest grid one sweep evaluates (each point is a whole check): a merge gate must
#: finish, and 16 x 16 word lengths x a few structures stay far below it.
MAX_SWEEP_POINTS = 4096
#: Points of a default width range (each target's, inside its kernel's limits).
DEFAULT_RANGE_POINTS = 5


def grid_size(targets, structures, accs, datas, coefs) -> int:
    """Upper bound of the configurations a sweep would evaluate, before any is resolved."""
    n = max(1, len(targets)) * max(1, len(structures or ())) * max(1, len(accs or ()))
    return n * len(datas or range(DEFAULT_RANGE_POINTS)) * len(coefs or range(DEFAULT_RANGE_POINTS))


def parse_widths(text: str | None, option: str) -> tuple[int, ...] | None:
    """Parse ``"12:32"`` (inclusive), ``"12:32:4"`` (with a step) or ``"16,24,32"``.

    >>> parse_widths("12:20:4", "--coef")
    (12, 16, 20)
    >>> parse_widths("32,16", "--data")
    (16, 32)
    """
    if text is None:
        return None
    m = _RANGE_RE.match(text)
    try:
        if m:
            lo, hi, step = int(m.group(1)), int(m.group(2)), int(m.group(3) or 1)
            if lo > hi or step < 1:
                raise ValueError
            vals = tuple(range(lo, hi + 1, step))
        else:
            vals = tuple(sorted({int(v) for v in text.split(",") if v.strip()}))
        if not vals or any(v < 2 or v > 64 for v in vals):
            raise ValueError
    except ValueError:
        raise DescriptionError("<command line>", f"'{text}' is not a list of word lengths; write LO:HI, "
                               "LO:HI:STEP or W1,W2,... with widths from 2 to 64 bits", key=option) from None
    return tuple(sorted(set(vals)))


def parse_names(text: str | None) -> tuple[str, ...] | None:
    if text is None:
        return None
    names = tuple(dict.fromkeys(v.strip() for v in text.split(",") if v.strip()))
    return names or None


@dataclass(frozen=True, order=True)
class Config:
    """One point of the sweep; widths are ``None`` for float32 targets."""

    target: str
    structure: str
    acc_bits: int | None
    data_bits: int | None
    coef_bits: int | None

    def label(self) -> str:
        if self.data_bits is None:
            return f"{self.target} {self.structure} float32"
        return f"{self.target} {self.structure} data {self.data_bits} coef {self.coef_bits} acc {self.acc_bits}"


@dataclass(frozen=True)
class ChannelRow:
    """One channel at one configuration."""

    channel: str
    ok: bool
    metrics: dict  # the METRICS plus limit_cycle status
    failing: tuple[str, ...]  # names of the failing checks
    memory_bytes: int
    data: str | None  # Q formats as realised
    coef: str | None


@dataclass(frozen=True)
class ConfigResult:
    config: Config
    channels: tuple[ChannelRow, ...]
    refused: str | None = None  # why `coefc build` would refuse it (then never offered)

    @property
    def ok(self) -> bool:
        return self.refused is None and all(c.ok for c in self.channels)

    @property
    def bits(self) -> int:
        c = self.config
        return 64 if c.data_bits is None else c.data_bits + c.coef_bits  # float32: 32 + 32

    @property
    def memory_bytes(self) -> int:
        return sum(c.memory_bytes for c in self.channels)

    def cost(self) -> tuple:
        return (self.bits, self.memory_bytes, self.config.acc_bits or 0)

    def worst(self, name: str):
        """The worst value of a metric over the channels (None when not measured)."""
        sense = dict(METRICS)[name]
        vals = [c.metrics.get(name) for c in self.channels if c.metrics.get(name) is not None]
        if not vals:
            return None
        return max(vals) if sense == "max" else min(vals)


@dataclass(frozen=True)
class SweepResult:
    source: str
    budget: Budget
    results: tuple[ConfigResult, ...]
    skipped: tuple[str, ...] = ()

    def cheapest(self) -> ConfigResult | None:
        """The cheapest configuration where every channel passes."""
        passing = [r for r in self.results if r.ok]
        return min(passing, key=ConfigResult.cost) if passing else None

    def cheapest_per_channel(self) -> dict[str, ConfigResult | None]:
        names = [c.channel for c in self.results[0].channels] if self.results else []
        out = {}
        for i, name in enumerate(names):
            passing = [r for r in self.results if r.channels[i].ok]
            out[name] = min(passing, key=lambda r: (r.bits, r.channels[i].memory_bytes)) if passing else None
        return out

    def to_json(self) -> dict:
        from .. import __version__

        best = self.cheapest()
        return {
            "schema": 1,
            "tool_version": __version__,
            "source": self.source,
            "ok": best is not None,
            "cheapest": None if best is None else _config_dict(best.config),
            "cheapest_per_channel": {k: None if v is None else _config_dict(v.config)
                                     for k, v in self.cheapest_per_channel().items()},
            "skipped": list(self.skipped),
            "configurations": [
                {**_config_dict(r.config), "ok": r.ok, "bits": r.bits, "memory_bytes": r.memory_bytes,
                 "channels": [{"name": c.channel, "ok": c.ok, "data": c.data, "coef": c.coef,
                               "memory_bytes": c.memory_bytes, "failing": list(c.failing), **c.metrics}
                              for c in r.channels]}
                for r in self.results],
        }

    def csv_rows(self) -> list[list]:
        """One row per configuration and channel, with a header row first."""
        head = ["target", "structure", "acc_bits", "data_bits", "coef_bits", "channel", "ok",
                *[m for m, _ in METRICS], "limit_cycle", "memory_bytes", "failing"]
        rows = [head]
        for r in self.results:
            c = r.config
            for ch in r.channels:
                rows.append([c.target, c.structure, c.acc_bits, c.data_bits, c.coef_bits, ch.channel, ch.ok,
                             *[ch.metrics.get(m) for m, _ in METRICS], ch.metrics.get("limit_cycle"),
                             ch.memory_bytes, " ".join(ch.failing)])
        return rows


def _config_dict(c: Config) -> dict:
    return {"target": c.target, "structure": c.structure, "acc_bits": c.acc_bits,
            "data_bits": c.data_bits, "coef_bits": c.coef_bits}


def _container_bytes(bits: int) -> int:
    for c in (8, 16, 32, 64):
        if bits <= c:
            return c // 8
    return 16


def program_memory_bytes(program: ChannelProgram) -> int:
    """Coefficient plus state memory of a realised channel, in standard containers.

    DF1 keeps four data words per section, TDF2 two accumulator words, DF1 with error
    feedback four data words and one error word; an FIR of N taps (also a polyphase
    one) keeps N - 1 data words and its non-zero taps (half of them when symmetric); a
    delay of D samples D data words.
    """
    a = program.arithmetic
    if a.is_float:
        dw = cw = aw = 4
    else:
        dw, cw, aw = _container_bytes(a.data.width), _container_bytes(a.coef.width), _container_bytes(a.acc_bits)
    total = 0
    for op in program.ops:
        if isinstance(op, SectionOp):
            total += 5 * cw
            st = STRUCTURE_TABLE[op.structure]
            total += st.data_states * dw + st.acc_states * aw
        elif isinstance(op, (FirOp, PolyFirOp)):  # zero taps (a half-band's every other tap) not stored
            n = len(op.taps)
            half = op.taps[:(n + 1) // 2] if op.symmetric else op.taps
            total += sum(1 for t in half if t) * cw
            total += (n - 1) * dw
        elif isinstance(op, GainOp):
            total += cw
        elif isinstance(op, DelayOp):
            total += op.samples * dw
    return total


class Sweeper:
    """Evaluates configurations of one design, reusing everything word-length free.

    Parameters
    ----------
    design : coefc.api.Design
        The float design (made once).
    budget : Budget
        Limits to judge each configuration by.
    overrides : Overrides
        Arithmetic settings held fixed over the sweep (rounding, overflow, scaling...).
    target_dirs : extra target folders.
    options : coefc.analyse.AnalysisOptions, optional
        Analysis effort; by default the measured noise is skipped (the analytic figure
        is used; ``coefc check`` measures it) to keep large sweeps fast.
    """

    def __init__(self, design, budget: Budget, overrides: Overrides | None = None,
                 target_dirs: Iterable = (), options=None) -> None:
        from ..analyse import AnalysisOptions

        self.design = design
        self.budget = budget
        self.overrides = overrides or Overrides()
        self.target_dirs = tuple(target_dirs)
        self.options = options or AnalysisOptions(measure_noise=False)
        self._targets: dict = {}
        self._cache: dict[Config, ConfigResult] = {}

    def target(self, name: str | None):
        key = name or ""
        if key not in self._targets:
            self._targets[key] = self.design.target(name, self.target_dirs)
        return self._targets[key]

    def base_arithmetic(self, target_name: str | None):
        from ..targetspec import resolve_arithmetic

        d = self.design.loaded.description
        return resolve_arithmetic(self.target(target_name), d.implementation, self.overrides, d.source)

    def overrides_for(self, config: Config, base=None) -> Overrides:
        base = base or self.base_arithmetic(config.target)
        ch = dict(structure=config.structure)
        if not base.is_float:
            ch["data"] = str(QFormat(base.data.int_bits, config.data_bits - base.data.int_bits))
            ch["coef"] = str(QFormat(base.coef.int_bits, config.coef_bits - base.coef.int_bits))
            ch["acc_bits"] = config.acc_bits
        o = self.overrides
        return Overrides(rounding=o.rounding, overflow=o.overflow, scaling=o.scaling, **ch)

    def evaluate(self, config: Config) -> ConfigResult:
        """Realise, analyse and judge one configuration (cached).

        A realisation ``coefc build`` would refuse is not analysed: its result has no
        channel rows, ``ok`` False and the reason in ``refused``.
        """
        from ..emit.buildable import refusal

        if config in self._cache:
            return self._cache[config]
        real = self.design.realise(self.target(config.target), self.overrides_for(config), budget=self.budget)
        why = refusal(real)
        if why is not None:
            res = ConfigResult(config, (), why)
            self._cache[config] = res
            return res
        report: CheckReport = run_check(real, self.budget, options=self.options)
        rows = []
        for prog, ch in zip(real.programs, report.channels):
            lc = ch.metrics.get("limit_cycle") or {}
            metrics = {m: ch.metrics.get(m) for m, _ in METRICS}
            metrics["limit_cycle"] = lc.get("status")
            metrics["limit_cycle_bound_lsb"] = lc.get("bound_lsb")
            a = prog.arithmetic
            rows.append(ChannelRow(ch.name, ch.ok, metrics, tuple(c.name for c in ch.checks if not c.ok),
                                   program_memory_bytes(prog), str(a.data) if a.data else None,
                                   str(a.coef) if a.coef else None))
        res = ConfigResult(config, tuple(rows))
        self._cache[config] = res
        return res

    def default_widths(self, target_name: str | None) -> tuple[tuple[int, ...], tuple[int, ...]]:
        """Default data and coefficient widths of a target: inside its kernel's limits.

        Up to 16 bits below the widest word the kernel computes (``[limits]``), in
        steps of 4 ending at that word, never below 8 bits: 16:32:4 on mcu32, 8:24:4
        on dsp24, 8:16:4 on mcu16.  A check-only target (no build tables) gets 16:32:4.
        """
        from ..targetspec import kernel_info

        info = kernel_info(self.target(target_name))
        if info is None:
            return tuple(range(16, 33, 4)), tuple(range(16, 33, 4))

        def widths(hi: int) -> tuple[int, ...]:
            return tuple(sorted(range(hi, max(hi - 16, 8) - 1, -4)))

        return widths(info.max_data_bits), widths(info.max_coef_bits)

    def refused(self, target_name: str | None, structure: str, acc: int, d: int, c: int) -> str:
        """Why a grid point is not offered before realising it ('' when it is).

        The arithmetic is resolved exactly as ``coefc check --data ... --coef ...
        --acc ...`` resolves it, so every refusal rule of the words (fractional bits,
        accumulator narrower than the data word, words beyond the kernel's limits)
        is the one in :func:`coefc.targetspec.resolve_arithmetic`.
        """
        from ..targetspec import resolve_arithmetic

        base = self.base_arithmetic(target_name)
        if d <= base.data.int_bits:
            return f"a {d}-bit data word has no fractional bit after {base.data.int_bits} integer bits"
        if c <= base.coef.int_bits + 1:
            return f"a {c}-bit coefficient word leaves too few fractional bits after {base.coef.int_bits} integer bits"
        d_ = self.design.loaded.description
        try:
            resolve_arithmetic(self.target(target_name), d_.implementation,
                               self.overrides_for(Config("", structure, acc, d, c), base), d_.source)
        except DescriptionError as e:
            return e.message
        return ""

    def configs(self, targets: Sequence[str | None], structures: Sequence[str] | None,
                accs: Sequence[int] | None, datas: Sequence[int] | None,
                coefs: Sequence[int] | None) -> tuple[list[Config], list[str]]:
        """Every configuration of the grid that build would accept, and the reasons some were skipped.

        ``None`` for *datas* or *coefs* means each target's default widths
        (:meth:`default_widths`).
        """
        out, skipped = [], []
        for tname in targets:
            base = self.base_arithmetic(tname)
            tgt = self.target(tname)
            for st in structures or (base.structure,):
                if st not in tgt.structures:
                    skipped.append(f"{tgt.name}: structure {st} not supported")
                    continue
                if base.is_float:
                    out.append(Config(tgt.name, st, None, None, None))
                    continue
                dd, dc = self.default_widths(tname)
                for acc, d, c in itertools.product(accs or (base.acc_bits,), datas or dd, coefs or dc):
                    why = self.refused(tname, st, acc, d, c)
                    if why:
                        skipped.append(f"{tgt.name} {st} data {d} coef {c} acc {acc}: {why}")
                        continue
                    out.append(Config(tgt.name, st, acc, d, c))
        return out, skipped

    def evaluate_many(self, configs: Sequence[Config], jobs: int = 1,
                      progress: Callable[[int, int], None] | None = None) -> list[ConfigResult]:
        """:meth:`evaluate` every one of *configs*, in their order, in up to *jobs* processes.

        Configurations are independent, so the results are the same whatever *jobs*
        is; each worker is a fork of this process (the float design and every cache
        filled so far are shared, not rebuilt), and the results come back into this
        sweeper's cache.  Work is handed out in runs of configurations that share a
        coefficient word (:func:`_dispatch_order`): they share every section's feedback
        words and with them the costliest per-section analysis, the granular
        limit-cycle search (kept per process, whatever the data word), while the
        section ordering, which depends on the data word only, is cheap to repeat.
        Without ``fork`` (or with one job) they are evaluated here, in that order too.
        """
        todo = _dispatch_order(c for c in dict.fromkeys(configs) if c not in self._cache)
        jobs = max(1, min(int(jobs), len(todo)))
        done = len(configs) - len(todo)
        if jobs > 1 and "fork" in _mp_methods():
            import multiprocessing

            global _WORKER
            _WORKER = self
            chunk = max(1, math.ceil(len(todo) / (jobs * 4)))
            pool = multiprocessing.get_context("fork").Pool(jobs, initializer=_worker_init)
            try:
                for cfg, res in zip(todo, pool.imap(_worker_evaluate, todo, chunksize=chunk)):
                    self._cache[cfg] = res
                    done += 1
                    if progress:
                        progress(done, len(configs))
                pool.close()
            finally:
                pool.terminate()
                pool.join()
                _WORKER = None
        else:
            for cfg in todo:
                self.evaluate(cfg)
                done += 1
                if progress:
                    progress(done, len(configs))
        return [self._cache[c] for c in configs]

    def run(self, configs: Sequence[Config], skipped: Sequence[str] = (),
            progress: Callable[[int, int], None] | None = None, jobs: int = 1) -> SweepResult:
        """Evaluate *configs* (in up to *jobs* processes); a realisation build would refuse moves to ``skipped``."""
        results, skipped = [], list(skipped)
        for cfg, r in zip(configs, self.evaluate_many(configs, jobs, progress)):
            if r.refused is None:
                results.append(r)
            else:
                skipped.append(f"{cfg.label()}: build would refuse it: {r.refused}")
        return SweepResult(self.design.loaded.description.source, self.budget, tuple(results), tuple(skipped))


def _dispatch_order(configs: Iterable[Config]) -> list[Config]:
    """*configs* grouped by target, structure, accumulator and coefficient word, data word last.

    The results do not depend on the order (every cache is keyed by all it reads);
    the order only decides which configurations one worker process evaluates
    together, and so how often a per-process cache hits.
    """
    return sorted(configs, key=lambda c: (c.target, c.structure, c.acc_bits or 0, c.coef_bits or 0,
                                          c.data_bits or 0))


def default_jobs() -> int:
    """The processes a sweep uses by default: the cores this process may run on."""
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except (AttributeError, OSError):
        return max(1, os.cpu_count() or 1)


def _mp_methods() -> list[str]:
    import multiprocessing

    return multiprocessing.get_all_start_methods()


_WORKER: Sweeper | None = None  # the sweeper a forked worker evaluates with


def _worker_init() -> None:
    # the parent handles interruption and terminates the pool; a worker just stops
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    signal.signal(signal.SIGTERM, signal.SIG_DFL)


def _worker_evaluate(config: Config) -> ConfigResult:
    return _WORKER.evaluate(config)


@dataclass(frozen=True)
class FewestBitsResult:
    """Smallest passing word lengths of one channel at a fixed target/structure/acc."""

    channel: str
    target: str
    structure: str
    acc_bits: int | None
    data_bits: int | None
    coef_bits: int | None
    evaluated: int  # grid points evaluated (out of the grid size)
    grid: int  # points of the grid build would accept (refused ones are never offered)
    refused: int = 0  # grid points skipped because build would refuse them
    per_op: list = field(default_factory=list)  # coefc.explore.opwidths.OpWidth, filled on request

    def to_json(self) -> dict:
        return {"channel": self.channel, "target": self.target, "structure": self.structure,
                "acc_bits": self.acc_bits, "data_bits": self.data_bits, "coef_bits": self.coef_bits,
                "evaluated": self.evaluated, "grid": self.grid, "refused": self.refused,
                "per_op": [w.to_json() for w in self.per_op]}


def fewest_bits(sweeper: Sweeper, channel_index: int, channel: str, target: str, structure: str,
                acc_bits: int | None, datas: Sequence[int] | None, coefs: Sequence[int] | None,
                jobs: int = 1) -> FewestBitsResult:
    """Smallest (data + coef, then data) passing widths of one channel: the grid's own minimum.

    The grid's points that build would accept are evaluated cheapest first, ties
    by the narrower data word, and the first that passes is the answer: every
    cheaper point has been evaluated and fails, so the answer is the exhaustive
    grid's whatever the shape of the verdict.  ``None`` widths when no point of
    the grid passes (then every point was evaluated).  ``None`` for *datas* or
    *coefs* means the target's default widths.  With *jobs* > 1 the points are
    evaluated *jobs* at a time, still in cost order, and the first passing one in
    that order is the answer (so the result is the same; a few more points may be
    evaluated).
    """
    base = sweeper.base_arithmetic(target)
    if base.is_float:
        return FewestBitsResult(channel, target, structure, None, None, None, 0, 1)
    acc = acc_bits or base.acc_bits
    dd, dc = sweeper.default_widths(target)
    points = [(d, c) for d in sorted(set(datas or dd)) for c in sorted(set(coefs or dc))
              if not sweeper.refused(target, structure, acc, d, c)]
    points.sort(key=lambda p: (p[0] + p[1], p[0]))
    evaluated = refused = 0
    name = sweeper.target(target).name
    step = max(1, int(jobs))
    for at in range(0, len(points), step):
        batch = points[at:at + step]
        results = sweeper.evaluate_many([Config(name, structure, acc, d, c) for d, c in batch], step)
        for (d, c), r in zip(batch, results):
            evaluated += 1
            if r.refused is not None:
                refused += 1
            elif r.channels[channel_index].ok:
                return FewestBitsResult(channel, target, structure, acc, d, c, evaluated,
                                        len(points) - refused, refused)
    return FewestBitsResult(channel, target, structure, acc, None, None, evaluated, len(points) - refused, refused)


def plot(result: SweepResult, path) -> None:
    """Each metric against word length, budget lines drawn; PNG or SVG by suffix.

    Coefficient-driven metrics (passband deviation, stopband attenuation) are drawn
    against the coefficient width at the widest data word; data-driven ones (noise,
    headroom) against the data width at the widest coefficient word.
    """
    try:
        import matplotlib

        matplotlib.use("Agg")
        import matplotlib.pyplot as plt
    except ImportError:
        from ..errors import CoefcError

        raise CoefcError("plotting needs matplotlib: pip install 'coefc[plot]'") from None
    from pathlib import Path

    fixed = [r for r in result.results if r.config.data_bits is not None]
    if not fixed:
        from ..errors import CoefcError

        raise CoefcError("nothing to plot: the sweep has no fixed-point configuration")
    names = [c.channel for c in fixed[0].channels]
    b = result.budget
    panels = (("passband_deviation_db", "coef", "passband deviation (dB)", b.passband_deviation_db, True),
              ("stopband_attenuation_db", "coef", "stopband attenuation (dB)", b.stopband_attenuation_db, False),
              ("output_noise_dbfs", "data", "output noise (dBFS, AES17)", b.output_noise_dbfs, False),
              ("headroom_bits", "data", "headroom (bits)", 0.0 if b.overflow == "none" else None, False))
    fig, axes = plt.subplots(2, 2, figsize=(11, 8), constrained_layout=True)
    groups = sorted({(r.config.target, r.config.structure, r.config.acc_bits) for r in fixed})
    for ax, (metric, axis, title, limit, logy) in zip(axes.flat, panels):
        for grp in groups:
            rows = [r for r in fixed if (r.config.target, r.config.structure, r.config.acc_bits) == grp]
            if axis == "coef":
                top = max(r.config.data_bits for r in rows)
                rows = sorted((r for r in rows if r.config.data_bits == top), key=lambda r: r.config.coef_bits)
                xs = [r.config.coef_bits for r in rows]
            else:
                top = max(r.config.coef_bits for r in rows)
                rows = sorted((r for r in rows if r.config.coef_bits == top), key=lambda r: r.config.data_bits)
                xs = [r.config.data_bits for r in rows]
            for i, name in enumerate(names):
                ys = [r.channels[i].metrics.get(metric) for r in rows]
                pts = [(x, y) for x, y in zip(xs, ys) if y is not None and math.isfinite(y) and (y > 0 or not logy)]
                if pts:
                    lab = name if len(groups) == 1 else f"{name} ({grp[0]} {grp[1]} acc {grp[2]})"
                    ax.plot(*zip(*pts), marker="o", ms=3, label=lab)
        if limit is not None:
            ax.axhline(limit, color="red", ls="--", lw=1, label="budget")
        if logy:
            ax.set_yscale("log")
        ax.set_xlabel(f"{'coefficient' if axis == 'coef' else 'data'} word length (bits)")
        ax.set_title(title)
        ax.grid(True, alpha=0.3)
        ax.legend(fontsize=7)
    fig.suptitle(f"coefc sweep: {result.source}")
    fig.savefig(Path(path), format=Path(path).suffix.lstrip(".").lower())
    plt.close(fig)
