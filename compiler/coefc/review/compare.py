"""Base against head: two checked descriptions in, what changed per channel out.

For each channel (matched by name) the comparison lists

* the stages: added, removed, or changed (kind and every key whose value differs);
* the realised integers: how many each program holds and which ops (sections,
  FIRs, gains, delays) hold integers that differ;
* the arithmetic (word lengths, rounding, structure) where it differs;
* every check: old and new value, limit and verdict, and the value's delta;
* every scalar metric of the JSON report with its delta (lists per op, per node
  and per tone are left out: their causes show in the integers and the response);
* the realised response (the exact values of the quantised coefficients,
  :func:`coefc.realise.as_float_blocks`) of both at the check frequencies -- the
  frequencies of the steady-tone check of either side, else the octave-band centre
  frequencies of IEC 61260-1 below 0.49 fs -- and its difference in dB.

A channel is ``changed`` when any of these differ.  The verdict of the comparison
is that of the new description.

References
----------
A. V. Oppenheim, R. W. Schafer, *Discrete-Time Signal Processing*, 3rd ed., sec. 6.8
(the response of quantised coefficients); IEC 61260-1:2014, *Octave-band and
fractional-octave-band filters*, annex E (nominal mid-band frequencies).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

from ..program import CicOp, DelayOp, FirOp, GainOp, PolyFirOp, RateOp, SectionOp

#: IEC 61260-1 nominal octave-band mid-frequencies, 31.5 Hz to 16 kHz (the fallback check frequencies)
OCTAVE_CENTRES_HZ = (31.5, 63.0, 125.0, 250.0, 500.0, 1000.0, 2000.0, 4000.0, 8000.0, 16000.0)
#: the response difference is reported at most at this many frequencies (the tone check's plan is smaller)
MAX_RESPONSE_POINTS = 512
_FLOOR_DB = -400.0


def _plain(v):
    """A value fit for JSON and comparison: tuples as lists, mappings as dicts."""
    if isinstance(v, (list, tuple)):
        return [_plain(x) for x in v]
    if isinstance(v, dict) or hasattr(v, "items"):
        return {str(k): _plain(x) for k, x in dict(v).items()}
    if isinstance(v, float) and not math.isfinite(v):
        return None
    return v


def _delta(old, new):
    num = (int, float)
    if isinstance(old, bool) or isinstance(new, bool) or not isinstance(old, num) or not isinstance(new, num):
        return None
    if not (math.isfinite(old) and math.isfinite(new)):
        return None
    return new - old


@dataclass(frozen=True)
class StageChange:
    index: int  # 1-based
    status: str  # added, removed, changed
    kind: tuple  # (old kind or None, new kind or None)
    keys: dict  # key -> (old or None, new or None), only keys that differ

    def as_dict(self) -> dict:
        return {"index": self.index, "status": self.status, "kind": {"old": self.kind[0], "new": self.kind[1]},
                "keys": {k: {"old": o, "new": n} for k, (o, n) in self.keys.items()}}


@dataclass(frozen=True)
class OpChange:
    op: int  # 1-based position in the program
    kind: str  # section, fir, gain, delay (new kind; old kind when removed)
    section: int | None  # 1-based section number for a section
    status: str  # added, removed, changed
    integers: int  # how many integers differ (all of them for added or removed)

    def as_dict(self) -> dict:
        return {"op": self.op, "kind": self.kind, "section": self.section, "status": self.status,
                "integers_changed": self.integers}


@dataclass(frozen=True)
class ChannelDiff:
    name: str
    status: str  # added, removed, both
    old_ok: bool | None
    new_ok: bool | None
    stages: tuple[StageChange, ...] = ()
    arithmetic: dict = field(default_factory=dict)  # key -> (old, new)
    integers: dict = field(default_factory=dict)  # old, new, changed (counts)
    ops: tuple[OpChange, ...] = ()
    checks: tuple[dict, ...] = ()
    metrics: tuple[dict, ...] = ()
    response: dict | None = None

    @property
    def verdict_changed(self) -> bool:
        return self.old_ok != self.new_ok

    @property
    def changed(self) -> bool:
        return (self.status != "both" or bool(self.stages) or bool(self.arithmetic) or bool(self.ops)
                or self.verdict_changed or any(c["changed"] for c in self.checks)
                or any(m["changed"] for m in self.metrics))

    def as_dict(self) -> dict:
        return {
            "name": self.name,
            "status": self.status,
            "changed": self.changed,
            "verdict": {"old": self.old_ok, "new": self.new_ok, "changed": self.verdict_changed},
            "stages": [s.as_dict() for s in self.stages],
            "arithmetic": {k: {"old": o, "new": n} for k, (o, n) in self.arithmetic.items()},
            "integers": {**self.integers, "ops": [o.as_dict() for o in self.ops]},
            "checks": list(self.checks),
            "metrics": list(self.metrics),
            "response": self.response,
        }


@dataclass(frozen=True)
class Comparison:
    old_source: str | None  # None: no old description (a file new in this revision)
    new_source: str
    old_ok: bool | None
    new_ok: bool
    description: dict  # top-level key -> (old, new), only those that differ
    budget: dict  # budget key -> (old, new), only those that differ
    channels: tuple[ChannelDiff, ...]

    @property
    def changed(self) -> bool:
        return bool(self.description) or bool(self.budget) or any(c.changed for c in self.channels)

    @property
    def exit_code(self) -> int:
        """The new description's verdict: 0 pass, 1 over budget."""
        return 0 if self.new_ok else 1

    def as_dict(self) -> dict:
        from .. import __version__

        return {
            "schema": 1,
            "tool_version": __version__,
            "old": {"source": self.old_source, "ok": self.old_ok},
            "new": {"source": self.new_source, "ok": self.new_ok},
            "ok": self.new_ok,
            "changed": self.changed,
            "description": {k: {"old": o, "new": n} for k, (o, n) in self.description.items()},
            "budget": {k: {"old": o, "new": n} for k, (o, n) in self.budget.items()},
            "channels": [c.as_dict() for c in self.channels],
        }


# ------------------------------------------------------------------ pieces

def compare_stages(old, new) -> list[StageChange]:
    """Stage by stage (by position): kinds and keys that differ; stages only one side has."""
    out = []
    olds = list(old.stages) if old is not None else []
    news = list(new.stages) if new is not None else []
    for i in range(max(len(olds), len(news))):
        o = olds[i] if i < len(olds) else None
        n = news[i] if i < len(news) else None
        op = _plain(o.params) if o is not None else {}
        np_ = _plain(n.params) if n is not None else {}
        keys = {k: (op.get(k), np_.get(k)) for k in list(op) + [k for k in np_ if k not in op]
                if op.get(k) != np_.get(k)}
        if o is None or n is None:
            out.append(StageChange(i + 1, "added" if o is None else "removed",
                                   (o.kind if o else None, n.kind if n else None), keys))
        elif o.kind != n.kind or keys:
            out.append(StageChange(i + 1, "changed", (o.kind, n.kind), keys))
    return out


def _op_kind(op) -> str:
    return {SectionOp: "section", FirOp: "fir", GainOp: "gain", DelayOp: "delay", PolyFirOp: "polyphase fir",
            RateOp: "rate", CicOp: "cic"}[type(op)]


def op_integers(op) -> list:
    """The integers (float32 values on a float target) an op holds, in a fixed order."""
    if isinstance(op, SectionOp):
        return [*op.b, *op.a, op.shift]
    if isinstance(op, FirOp):
        return [*op.taps, op.shift]
    if isinstance(op, GainOp):
        return [op.coef, op.shift]
    if isinstance(op, PolyFirOp):
        return [*op.taps, op.shift, op.down, op.up]
    if isinstance(op, RateOp):
        return [op.down, op.up]
    if isinstance(op, CicOp):
        return [op.factor, op.stages, op.delay, op.register_bits, op.coef, op.shift]
    return [op.samples]


def compare_programs(old, new) -> tuple[dict, list[OpChange]]:
    """Counts of realised integers on each side and how many differ, and the ops that hold them."""
    old_ops = list(old.ops) if old is not None else []
    new_ops = list(new.ops) if new is not None else []
    changes = []
    differ = 0
    sec_old = sec_new = 0
    for i in range(max(len(old_ops), len(new_ops))):
        o = old_ops[i] if i < len(old_ops) else None
        n = new_ops[i] if i < len(new_ops) else None
        if isinstance(o, SectionOp):
            sec_old += 1
        if isinstance(n, SectionOp):
            sec_new += 1
        section = sec_new if isinstance(n, SectionOp) else (sec_old if isinstance(o, SectionOp) and n is None else None)
        if o is None or n is None:
            k = len(op_integers(n if o is None else o))
            differ += k
            changes.append(OpChange(i + 1, _op_kind(n if o is None else o), section,
                                    "added" if o is None else "removed", k))
            continue
        oi, ni = op_integers(o), op_integers(n)
        if type(o) is not type(n) or len(oi) != len(ni):
            k = max(len(oi), len(ni))
        else:
            k = sum(1 for a, b in zip(oi, ni) if a != b)
        if k:
            differ += k
            changes.append(OpChange(i + 1, _op_kind(n), section, "changed", k))
    counts = {"old": sum(len(op_integers(o)) for o in old_ops), "new": sum(len(op_integers(o)) for o in new_ops),
              "changed": differ}
    return counts, changes


def compare_checks(old_ch, new_ch) -> list[dict]:
    """Every check of either side: old and new value, limit and verdict, the value's delta."""
    olds = {c["name"]: c for c in (old_ch or {}).get("checks", [])}
    news = {c["name"]: c for c in (new_ch or {}).get("checks", [])}
    names = sorted(set(olds) | set(news), key=lambda n: (n not in news, list(news).index(n) if n in news else 0, n))
    out = []
    for name in names:
        o, n = olds.get(name, {}), news.get(name, {})
        row = {"name": name,
               "old": {"value": o.get("value"), "limit": o.get("limit"), "ok": o.get("ok")},
               "new": {"value": n.get("value"), "limit": n.get("limit"), "ok": n.get("ok")},
               "delta": _delta(o.get("value"), n.get("value"))}
        row["changed"] = row["old"] != row["new"]
        out.append(row)
    return out


def flatten_metrics(metrics: dict, prefix: str = "") -> dict:
    """The scalar metrics of a JSON report's channel, nested keys joined with dots (lists left out)."""
    out = {}
    for k, v in (metrics or {}).items():
        key = f"{prefix}{k}"
        if isinstance(v, dict):
            out.update(flatten_metrics(v, key + "."))
        elif not isinstance(v, (list, tuple)):
            out[key] = v
    return out


def compare_metrics(old_m: dict | None, new_m: dict | None) -> list[dict]:
    """Every scalar metric of either side with its old and new value and, for numbers, the delta."""
    o, n = flatten_metrics(old_m or {}), flatten_metrics(new_m or {})
    out = []
    for k in list(n) + [k for k in o if k not in n]:
        a, b = o.get(k), n.get(k)
        out.append({"name": k, "old": a, "new": b, "delta": _delta(a, b), "changed": a != b})
    return out


def _tone_freqs(ch: dict | None) -> list[float]:
    tones = ((ch or {}).get("metrics") or {}).get("tones") or {}
    return [float(t["freq_hz"]) for t in tones.get("tones", []) if t.get("freq_hz") is not None]


def check_frequencies(old_ch: dict | None, new_ch: dict | None, fs_old: float | None, fs_new: float) -> list[float]:
    """The tone-check frequencies of either side (below 0.49 of both rates), else the octave centres."""
    top = 0.49 * min(f for f in (fs_old, fs_new) if f)
    freqs = sorted({round(f, 6) for f in _tone_freqs(old_ch) + _tone_freqs(new_ch) if 0 < f < top})
    if not freqs:
        freqs = [f for f in OCTAVE_CENTRES_HZ if f < top]
    if len(freqs) > MAX_RESPONSE_POINTS:
        step = len(freqs) / MAX_RESPONSE_POINTS
        freqs = [freqs[int(i * step)] for i in range(MAX_RESPONSE_POINTS)]
    return freqs


def realised_db(program, freqs_hz) -> list[float]:
    """The response of *program*'s quantised coefficients at *freqs_hz*, in dB (floor -400 dB)."""
    import numpy as np

    from ..blocks import chain_response
    from ..blocks import as_float_blocks

    h = np.abs(chain_response(as_float_blocks(program), np.asarray(freqs_hz, dtype=float), program.sample_rate_hz))
    with np.errstate(divide="ignore"):
        db = 20.0 * np.log10(h)
    return [max(_FLOOR_DB, float(x)) if math.isfinite(x) else _FLOOR_DB for x in db]


def compare_response(old_prog, new_prog, old_ch, new_ch) -> dict | None:
    if old_prog is None or new_prog is None:
        return None
    freqs = check_frequencies(old_ch, new_ch, old_prog.sample_rate_hz, new_prog.sample_rate_hz)
    if not freqs:
        return None
    a, b = realised_db(old_prog, freqs), realised_db(new_prog, freqs)
    d = [y - x for x, y in zip(a, b)]
    worst = max(range(len(d)), key=lambda i: abs(d[i]))
    source = "tone-check frequencies" if _tone_freqs(old_ch) or _tone_freqs(new_ch) else "octave-band centres"
    return {"frequencies": source, "freq_hz": freqs, "old_db": a, "new_db": b, "delta_db": d,
            "max_abs_delta_db": abs(d[worst]), "at_hz": freqs[worst]}


def _differ(old: dict, new: dict) -> dict:
    return {k: (old.get(k), new.get(k)) for k in list(old) + [k for k in new if k not in old]
            if old.get(k) != new.get(k)}


def _description_dict(d) -> dict:
    from dataclasses import asdict

    return {"name": d.name, "sample_rate_hz": d.sample_rate_hz,
            **{f"implementation.{k}": v for k, v in asdict(d.implementation).items()}}


# ------------------------------------------------------------------ the comparison

def compare(old, new) -> Comparison:
    """Compare two checked descriptions.

    Parameters
    ----------
    old, new : tuple of (coefc.budget.CheckReport, coefc.api.Realisation)
        Each side's report and realisation; *old* may be ``None`` (the file is new).
    """
    new_rep, new_real = new
    old_rep, old_real = old if old is not None else (None, None)
    new_json = new_rep.to_json()
    old_json = old_rep.to_json() if old_rep is not None else None
    new_desc = new_real.design.loaded.description
    old_desc = old_real.design.loaded.description if old_real is not None else None

    new_specs = {c.name: c for c in new_desc.channels}
    old_specs = {c.name: c for c in old_desc.channels} if old_desc is not None else {}
    new_progs = {p.name: p for p in new_real.programs}
    old_progs = {p.name: p for p in old_real.programs} if old_real is not None else {}
    new_chs = {c["name"]: c for c in new_json["channels"]}
    old_chs = {c["name"]: c for c in old_json["channels"]} if old_json is not None else {}

    names = list(new_progs) + [n for n in old_progs if n not in new_progs]
    channels = []
    for name in names:
        o_ch, n_ch = old_chs.get(name), new_chs.get(name)
        status = "both" if o_ch is not None and n_ch is not None else ("added" if o_ch is None else "removed")
        counts, ops = compare_programs(old_progs.get(name), new_progs.get(name))
        channels.append(ChannelDiff(
            name=name, status=status,
            old_ok=o_ch["ok"] if o_ch is not None else None, new_ok=n_ch["ok"] if n_ch is not None else None,
            stages=tuple(compare_stages(old_specs.get(name), new_specs.get(name))),
            arithmetic=_differ(o_ch["arithmetic"], n_ch["arithmetic"]) if status == "both" else {},
            integers=counts, ops=tuple(ops),
            checks=tuple(compare_checks(o_ch, n_ch)),
            metrics=tuple(compare_metrics((o_ch or {}).get("metrics"), (n_ch or {}).get("metrics"))),
            response=compare_response(old_progs.get(name), new_progs.get(name), o_ch, n_ch)))
    description = _differ(_description_dict(old_desc), _description_dict(new_desc)) if old_desc is not None else {}
    budget = _differ(_plain(old_json["budget"]), _plain(new_json["budget"])) if old_json is not None else {}
    return Comparison(old_rep.source if old_rep is not None else None, new_rep.source,
                      old_rep.ok if old_rep is not None else None, new_rep.ok, description, budget,
                      tuple(channels))
