"""Many descriptions checked at once: one outcome per file, in parallel processes.

Each file runs the whole of ``coefc check`` (load, design, realise, the build
refusal rules, analysis, budget) in a worker process; the outcome carries what
the reporters need -- the text report, the JSON report, the JUnit suites and the
findings placed at their line in the file -- and never an exception: a bad file
becomes an outcome with exit code 2 and its one-line error, a bug in coefc one
with exit code 3.  The outcomes come back in the order the files were named, so
every report is the same whatever the number of processes.

Exit codes combine as the worst: 3 (internal error) over 2 (bad input) over
1 (over budget) over 0 (pass).
"""

from __future__ import annotations

import os
from dataclasses import dataclass, field
from pathlib import Path

from ..errors import CoefcError, DescriptionError, internal_error_line

#: exit codes from best to worst
EXIT_ORDER = (0, 1, 2, 3)
VERDICT = {0: "pass", 1: "over budget", 2: "bad input", 3: "internal error"}


def worst(codes) -> int:
    """The worst of exit *codes* (3 internal error > 2 bad input > 1 over budget > 0 pass)."""
    return max(codes, key=EXIT_ORDER.index, default=0)


def default_jobs() -> int:
    """The processors this process may run on (its CPU affinity; else the machine's count)."""
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except (AttributeError, OSError):
        return max(1, os.cpu_count() or 1)


@dataclass(frozen=True)
class CheckSettings:
    """What the command line asks of every file (plain values: it crosses into worker processes)."""

    target: str | None = None
    target_dirs: tuple[str, ...] = ()
    arithmetic: tuple[tuple[str, object], ...] = ()  # override options (data, coef, acc, ...) by name
    channels: tuple[str, ...] = ()
    budget_overrides: tuple[tuple[str, object], ...] = ()
    noise_samples: int = 1 << 15
    max_states: int = 1 << 24
    #: how error messages name settings (coefc.errors.setting): the CLI passes its options
    setting_names: tuple[tuple[str, str], ...] = ()


@dataclass(frozen=True)
class Finding:
    """One failing check (or a bad file), placed at the line of the key or stage it concerns."""

    rule: str  # the check's name, or "bad-input" / "internal-error"
    message: str
    line: int | None  # 1-based, None: the file as a whole
    channel: str | None = None


@dataclass(frozen=True)
class FileOutcome:
    """The result of checking one file."""

    source: str
    code: int  # 0 pass, 1 over budget, 2 bad input, 3 internal error
    text: str = ""  # the text report
    report: dict | None = None  # the JSON report (schema of coefc.budget)
    junit_suites: tuple[str, ...] = ()
    findings: tuple[Finding, ...] = ()
    notes: tuple[str, ...] = ()  # for stderr: cautions, notes on the realisation
    error: str | None = None  # the one line of a bad input or internal error

    @property
    def verdict(self) -> str:
        return VERDICT[self.code]

    def summary(self) -> str:
        """One line: the file, its verdict and what decided it."""
        if self.error is not None:
            err = self.error
            if err.startswith(self.source) and err[len(self.source):len(self.source) + 1] in (":", ","):
                err = err[len(self.source) + 1:].lstrip()
            return f"{self.source}: {self.verdict}: {err}"
        chans = self.report["channels"] if self.report else []
        failed = [f"{ch['name']}.{c['name']}" for ch in chans for c in ch["checks"] if not c["ok"]]
        n = len(chans)
        if not failed:
            return f"{self.source}: pass ({n} channel{'s' if n != 1 else ''})"
        return f"{self.source}: over budget: {len(failed)} check(s) fail ({', '.join(failed)})"


def check_file(path, settings: CheckSettings):
    """Run ``coefc check`` on *path*: ``(report, realisation, notes)``; raises :class:`CoefcError` on bad input."""
    from ..api import load

    return check_loaded(load(path), settings)


def check_loaded(loaded, settings: CheckSettings):
    """Run ``coefc check`` on a loaded description: ``(report, realisation, notes)``."""
    from ..analyse import AnalysisOptions
    from ..budget import apply_overrides, run_check
    from ..emit.buildable import validate
    from ..targetspec import Overrides

    a = dict(settings.arithmetic)
    ov = Overrides(structure=a.get("structure"), data=a.get("data"), coef=a.get("coef"), acc_bits=a.get("acc"),
                   rounding=a.get("rounding"), overflow=a.get("overflow"), scaling=a.get("scaling"))
    budget = apply_overrides(loaded.description.budget, **dict(settings.budget_overrides))
    real = loaded.design(settings.channels or None).realise(settings.target, ov, settings.target_dirs, budget=budget)
    notes = []
    impl = loaded.description.implementation
    if real.programs and real.programs[0].arithmetic.is_float and impl.structure == "df1ef" and ov.structure is None:
        notes.append(f"{loaded.description.source}: target '{real.target.name}' runs the description's df1ef as "
                     "df1: float32 has no fixed-point rounding residual to feed back")
    validate(real, generated=True)  # what `coefc build --kernel` would refuse fails here too (exit 2), before the analysis
    report = run_check(real, budget, options=AnalysisOptions(noise_samples=settings.noise_samples,
                                                             max_states=settings.max_states))
    return report, real, notes


def _width(qformat: str | None) -> int | None:
    """The width in bits of a Q format as the report writes it (``"Q1.15"``: 16), or None."""
    from ..qformat import QFormat

    try:
        return QFormat.parse(qformat).width if qformat else None
    except ValueError:
        return None


def findings_of(report, description, text: str) -> list[Finding]:
    """A :class:`Finding` per failing check of *report*, at the line of its budget key or channel.

    The line is that of the key setting the limit: the channel's own
    ``[channel.budget]`` key, else the key of the ``[budget.when_data_bits.N]`` table
    of its data word's width, else the ``[budget]`` key; a limit from the command
    line or a default is placed at the channel's ``name``; ``stable`` and
    ``l1_scaling`` (no budget key) at the channel's first stage, and the IEC 61672
    check at its weighting stage.
    """
    from ..checks import kind_of, over_budget_text
    from .locate import scan

    where = scan(text)
    specs = {c.name: c for c in description.channels}
    out = []
    for ch in report.channels:
        cl = where.channel(ch.name)
        for c in ch.checks:
            if c.ok:
                continue
            kind = kind_of(c.name)
            line = None
            if kind.budget_key and c.name not in report.budget.command_line:
                line = where.budget_key(c.name, ch.name, _width(ch.arithmetic.get("data")))
            if line is None and cl is not None:
                spec = specs.get(ch.name)
                weighting = [s.index for s in spec.stages if s.kind == "weighting"] if spec else []
                if c.name.startswith("iec61672") and weighting:
                    line = cl.stage(weighting[0])
                elif not kind.budget_key:
                    line = cl.stage(1)
                else:
                    line = cl.line
            reason = ch.reasons.get(c.name, "")
            msg = f"channel '{ch.name}': {over_budget_text(c.name, c.value, c.limit)}" + (f": {reason}" if reason else "")
            if c.name in report.budget.command_line:
                msg += " (limit set on the command line)"
            elif c.name in (report.defaults or {}):
                msg += " (default limit: the budget names none)"
            out.append(Finding(c.name, msg, line, ch.name))
    return out




def _error_finding(path: str, e: CoefcError, text: str) -> Finding:
    line = None
    if isinstance(e, DescriptionError):
        line = e.line
        if line is None and (e.channel is not None or e.key is not None):
            from .locate import scan

            try:
                lines = scan(Path(path).read_text(encoding="utf-8", errors="replace"))
            except (OSError, ValueError):
                return Finding("bad-input", text, None)
            key = e.key or ""
            budget_key = key.split(".", 1)[1] if key.startswith("budget.") else None
            cl = lines.channel(e.channel) if e.channel is not None else None
            if cl is not None:
                line = (cl.stage(e.stage) if e.stage is not None
                        else cl.budget_keys.get(budget_key) or cl.line)
            elif e.channel is None:  # a [budget] or top-level key
                line = lines.budget_keys.get(budget_key) if budget_key else lines.top_keys.get(key)
    return Finding("bad-input", text, line)


def run_file(path: str, settings: CheckSettings) -> FileOutcome:
    """Check one file; every failure becomes the outcome's exit code and line (never an exception)."""
    from ..reports.text import junit_suites, render

    try:
        report, real, notes = check_file(path, settings)
        text = Path(path).read_bytes().decode("utf-8", errors="replace")
        return FileOutcome(path, 0 if report.ok else 1, render(report, "text"), report.to_json(),
                           tuple(junit_suites(report)), tuple(findings_of(report, real.design.loaded.description, text)),
                           tuple(notes) + tuple(report.cautions))
    except CoefcError as e:
        text = e.spoken(dict(settings.setting_names))
        return FileOutcome(path, 2, findings=(_error_finding(path, e, text),), error=text)
    except MemoryError:
        msg = f"{path}: the input needs more memory than this machine has; make it smaller"
        return FileOutcome(path, 2, findings=(Finding("bad-input", msg, None),), error=msg)
    except (KeyboardInterrupt, SystemExit):
        raise
    except Exception as e:  # a bug of coefc: this file's outcome, the others still run
        msg = internal_error_line(e)
        return FileOutcome(path, 3, findings=(Finding("internal-error", msg, None),), error=msg)


def _pool(jobs: int):
    import multiprocessing
    from concurrent.futures import ProcessPoolExecutor

    # forkserver: workers start from a clean process (no threads of the parent's
    # numerical libraries carried across fork); spawn where it is missing
    method = "forkserver" if "forkserver" in multiprocessing.get_all_start_methods() else "spawn"
    ctx = multiprocessing.get_context(method)
    if method == "forkserver":
        ctx.set_forkserver_preload(["coefc.review.batch", "coefc.api", "coefc.budget"])
    return ProcessPoolExecutor(max_workers=jobs, mp_context=ctx)


def _stop(pool) -> None:
    pool.shutdown(wait=False, cancel_futures=True)
    stop = getattr(pool, "terminate_workers", None)  # Python 3.14
    if stop is not None:
        stop()
        return
    for proc in list((getattr(pool, "_processes", None) or {}).values()):
        proc.terminate()


def check_files(paths, settings: CheckSettings, jobs: int | None = None):
    """Check every file of *paths*; yields a :class:`FileOutcome` per file, in the order given.

    With *jobs* > 1 (default :func:`default_jobs`) the files run in that many worker
    processes; an interrupt stops the workers.
    """
    paths = [str(p) for p in paths]
    jobs = min(jobs or default_jobs(), len(paths))
    if jobs <= 1:
        for p in paths:
            yield run_file(p, settings)
        return
    from concurrent.futures.process import BrokenProcessPool

    pool = _pool(jobs)
    try:
        futures = [pool.submit(run_file, p, settings) for p in paths]
        for p, fut in zip(paths, futures):
            try:
                yield fut.result()
            except BrokenProcessPool:
                msg = (f"{p}: the worker process checking this file ended abruptly (killed, or out of memory); "
                       "run it alone with -j 1")
                yield FileOutcome(p, 3, findings=(Finding("internal-error", msg, None),), error=msg)
    except BaseException:
        _stop(pool)
        raise
    else:
        pool.shutdown(wait=True)
