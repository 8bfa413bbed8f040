"""Targets: folders with a ``target.toml`` that states a chip's arithmetic exactly.

Search order for a target name: each ``--target-dir`` given (in order), then the
folders listed in the environment variable ``COEFC_TARGET_PATH`` (``os.pathsep``
separated), then the built-in targets shipped inside the package.  A folder is a
target when it contains ``target.toml``; a search directory may be a target itself
or hold target folders.
"""

from __future__ import annotations

import os
import re
import tomllib
from collections.abc import Iterable, Mapping
from dataclasses import dataclass, field
from importlib import resources
from pathlib import Path
from types import MappingProxyType

from .errors import DescriptionError, TargetError, close_match, setting
from .program import KINDS, SCALINGS, STRUCTURE_TABLE, STRUCTURES, Arithmetic
from .qformat import OVERFLOW_MODES, ROUNDING_HINTS, ROUNDING_MODES, QFormat

ENV_VAR = "COEFC_TARGET_PATH"


@dataclass(frozen=True, eq=False)
class Target:
    """A loaded target: its folder, its arithmetic defaults and raw table."""

    name: str
    folder: Path
    summary: str
    arithmetic: Arithmetic  # the defaults
    structures: tuple[str, ...]
    raw: Mapping = field(default_factory=lambda: MappingProxyType({}))  # the whole target.toml
    #: ``[arithmetic] section_cost``: what one second-order section of a structure costs on this
    #: chip, in multiplies per sample, where the target states it (else the table's ``multiplies``)
    section_cost: Mapping = field(default_factory=lambda: MappingProxyType({}))

    def cost_of(self, structure: str) -> int:
        """Multiplies per sample of one section in *structure* on this target (its own figure, else the table's)."""
        return int(self.section_cost.get(structure, STRUCTURE_TABLE[structure].multiplies))


def builtin_dir() -> Path:
    """The folder of the built-in targets (``targets/`` in a checkout)."""
    return Path(str(resources.files("coefc._builtin_targets")))


def common_dir() -> Path:
    """The built-in targets' shared templates (``targets/_common``): the header template and
    the fixed-point reference kernel, looked up after a target folder's own files."""
    return builtin_dir() / "_common"


def search_dirs(extra: Iterable[str | os.PathLike] = ()) -> list[Path]:
    dirs = [Path(d) for d in extra]
    env = os.environ.get(ENV_VAR, "")
    dirs += [Path(d) for d in env.split(os.pathsep) if d]
    dirs.append(builtin_dir())
    return dirs


def _target_folders(d: Path) -> list[Path]:
    if (d / "target.toml").is_file():
        return [d]
    if not d.is_dir():
        return []
    return sorted(p for p in d.iterdir() if (p / "target.toml").is_file())


def _checked_dirs(extra_dirs: Iterable[str | os.PathLike]) -> list[Path]:
    """:func:`search_dirs`, refusing a named folder that is missing or is a file."""
    dirs = search_dirs(extra_dirs)
    for d in dirs:
        if d == builtin_dir():
            continue
        if not d.exists():
            raise TargetError(f"{d}: target directory does not exist; fix the target folders ({setting('target_dirs')}) or {ENV_VAR}")
        if not d.is_dir():
            raise TargetError(f"{d}: is a file, not a target directory; give the folder that holds "
                              f"target.toml ({setting('target_dirs')} or {ENV_VAR})")
    return dirs


def list_targets(extra_dirs: Iterable[str | os.PathLike] = ()) -> list[Target]:
    """Every target visible, first occurrence of a name winning."""
    seen: dict[str, Target] = {}
    for d in _checked_dirs(extra_dirs):
        for folder in _target_folders(Path(d)):
            if folder.name not in seen:
                seen[folder.name] = load_target(folder)
    return list(seen.values())


def find_target(name: str, extra_dirs: Iterable[str | os.PathLike] = ()) -> Target:
    """The first target called *name* on the search path (TargetError when none)."""
    if not name or not name.strip():
        raise TargetError("the target name is empty; name one such as mcu32 (see coefc targets)")
    for d in _checked_dirs(extra_dirs):
        for folder in _target_folders(Path(d)):
            if folder.name == name:
                return load_target(folder)
    names = [t.name for t in list_targets(extra_dirs)]
    raise TargetError(
        f"no target '{name}'{close_match(name, names)}; known targets: {', '.join(names)} "
        f"(add folders with {setting('target_dirs')} or {ENV_VAR})"
    )


def load_target(folder: Path) -> Target:
    """Load and validate ``folder/target.toml``."""
    path = folder / "target.toml"
    try:
        raw = tomllib.loads(path.read_text(encoding="utf-8"))
    except tomllib.TOMLDecodeError as e:
        m = re.search(r"\(at line (\d+), column (\d+)\)", str(e))
        at = f"{path}:{m.group(1)}" if m else str(path)
        msg = re.sub(r"\s*\(at line \d+, column \d+\)", "", str(e))
        raise TargetError(f"{at}: {msg}; fix the TOML syntax") from None
    except (OSError, UnicodeDecodeError) as e:
        raise TargetError(f"{path}: cannot read ({e})") from None
    except RecursionError:
        raise TargetError(f"{path}: arrays or tables nested too deeply to read; flatten the TOML") from None
    ar = raw.get("arithmetic")
    if not isinstance(ar, dict):
        raise TargetError(f"{path}: missing table [arithmetic]; see the README section on writing a target")

    def get(key, allowed=None, typ=str, default=None):
        if key not in ar:
            if default is not None:
                return default
            raise TargetError(f"{path}: [arithmetic] needs key '{key}'")
        v = ar[key]
        if not isinstance(v, typ) or isinstance(v, bool):
            raise TargetError(f"{path}: [arithmetic] key '{key}' must be a {typ.__name__}, got {v!r}")
        if allowed and v not in allowed:
            hint = close_match(v, allowed, ROUNDING_HINTS if key == "rounding" else ())
            raise TargetError(f"{path}: [arithmetic] key '{key}' = {v!r}{hint}; use one of {', '.join(allowed)}")
        return v

    kind = get("kind", KINDS, default="fixed")
    structures = ar.get("structures", ["df1"])
    if not isinstance(structures, list) or not structures or any(s not in STRUCTURES for s in structures):
        raise TargetError(f"{path}: [arithmetic] structures must be a non-empty list drawn from {', '.join(STRUCTURES)}")
    structure = get("structure", STRUCTURES, default=structures[0])
    scaling = get("scaling", SCALINGS, default="none")
    section_cost = ar.get("section_cost", {})
    if not isinstance(section_cost, dict):
        raise TargetError(f"{path}: [arithmetic] section_cost must be a table of structure = multiplies, e.g. "
                          "section_cost = { \"df1-wide-fb\" = 9 }")
    for name, cost in section_cost.items():
        if name not in structures:
            raise TargetError(f"{path}: [arithmetic] section_cost names '{name}'{close_match(name, structures)}, "
                              f"which structures does not list; name one of {', '.join(structures)}")
        if isinstance(cost, bool) or not isinstance(cost, int) or not 1 <= cost <= 1000:
            raise TargetError(f"{path}: [arithmetic] section_cost of '{name}' = {cost!r}; write the multiplies per "
                              "sample of one section on this chip, a whole number from 1 to 1000")
    if kind == "float32":
        arith = Arithmetic(kind="float32", structure=structure, data=None, coef=None, acc_bits=32,
                           rounding="add-half", overflow="saturate", scaling=scaling)
    else:
        try:
            data = QFormat.parse(get("data"))
            coef = QFormat.parse(get("coef"))
        except ValueError as e:
            raise TargetError(f"{path}: [arithmetic] {e}") from None
        acc = get("acc_bits", typ=int)
        if not 2 <= acc <= 128:
            raise TargetError(f"{path}: [arithmetic] acc_bits = {acc}; use 2..128")
        pshift = get("product_shift", typ=int, default=0)
        if not 0 <= pshift <= min(62, coef.frac_bits - 1):
            raise TargetError(f"{path}: [arithmetic] product_shift = {pshift}; use 0 (exact products) up to "
                              f"{min(62, coef.frac_bits - 1)} (below the coefficient's {coef.frac_bits} fractional bits)")
        exact_only = [s for s in structures if STRUCTURE_TABLE[s].wide_feedback or STRUCTURE_TABLE[s].state_space]
        if pshift and exact_only:
            raise TargetError(f"{path}: [arithmetic] structures lists {', '.join(exact_only)}, which coefc models "
                              "with exact products only; drop them or set product_shift = 0")
        arith = Arithmetic(kind="fixed", structure=structure, data=data, coef=coef, acc_bits=acc,
                           rounding=get("rounding", ROUNDING_MODES), overflow=get("overflow", OVERFLOW_MODES),
                           scaling=scaling, product_shift=pshift,
                           product_rounding=get("product_rounding", ROUNDING_MODES, default="truncate"))
    return Target(name=folder.name, folder=folder, summary=str(raw.get("summary", "")),
                  arithmetic=arith, structures=tuple(structures), raw=MappingProxyType(raw),
                  section_cost=MappingProxyType(dict(section_cost)))


@dataclass(frozen=True)
class Overrides:
    """Arithmetic overrides from the command line (``None`` = not given)."""

    structure: str | None = None
    data: str | None = None
    coef: str | None = None
    acc_bits: int | None = None
    rounding: str | None = None
    overflow: str | None = None
    scaling: str | None = None


def resolve_arithmetic(target: Target, implementation, overrides: Overrides | None = None,
                       source: str = "<description>", *, channel: str | None = None,
                       channel_structure: str | None = None) -> Arithmetic:
    """Target defaults, then the description's ``[implementation]``, then a channel's
    own ``structure`` (*channel_structure*, of the channel named *channel*), then CLI overrides.

    One options schema, several ways to set it, same effect however given.  On a
    float32 target the description's fixed-point settings (Q formats, accumulator,
    and ``df1ef``, which becomes ``df1``: float32 has no rounding residual to feed
    back) do not apply; a structure named on the command line is never changed.
    """
    arith = target.arithmetic
    structure_from = None
    structure_channel = None  # the channel whose own structure is in force, for messages
    width_from = {k: str(target.folder / "target.toml") for k in ("data", "coef", "acc_bits")}
    layers = [(implementation, source)]
    if channel_structure is not None:
        layers.append((Overrides(structure=channel_structure), source))
    if overrides is not None:
        layers.append((overrides, "<command line>"))
    for n_layer, (layer, where) in enumerate(layers):
        in_channel = channel if (channel_structure is not None and n_layer == 1) else None
        changes = {}
        for key in ("structure", "data", "coef", "acc_bits", "rounding", "overflow", "scaling"):
            v = getattr(layer, key, None)
            if v is None:
                continue
            if key in ("data", "coef", "acc_bits") and arith.is_float and where == "<command line>":
                option = setting(key)
                raise DescriptionError(where, f"target '{target.name}' computes in float32, which has no "
                                       f"fixed-point words; drop {option} or choose a fixed-point target",
                                       key=option)
            if key in width_from:
                width_from[key] = where
            if key in ("data", "coef"):
                if arith.is_float:
                    continue  # float32 targets have no Q formats
                try:
                    v = QFormat.parse(v)
                except ValueError as e:
                    raise DescriptionError(where, str(e), key=key) from None
            elif key == "structure":
                if arith.is_float and v in STRUCTURE_TABLE and not STRUCTURE_TABLE[v].float32 and where != "<command line>":
                    # Error feedback re-injects a fixed-point rounding residual; float32
                    # has none, so a description's df1ef means plain df1 there.
                    v = "df1"
                if v not in STRUCTURES and v != "auto":
                    raise DescriptionError(where, f"unknown structure '{v}'; use one of {', '.join(STRUCTURES)} "
                                           "or auto",
                                           key=key, channel=in_channel)
                structure_from = where  # checked against the target once every layer is applied
                structure_channel = in_channel
            elif key == "rounding" and v not in ROUNDING_MODES:
                raise DescriptionError(where, f"unknown rounding '{v}'{close_match(v, ROUNDING_MODES, ROUNDING_HINTS)}; "
                                       f"use one of {', '.join(ROUNDING_MODES)}", key=key)
            elif key == "overflow" and v not in OVERFLOW_MODES:
                raise DescriptionError(where, f"unknown overflow '{v}'; use one of {', '.join(OVERFLOW_MODES)}", key=key)
            elif key == "scaling" and v not in SCALINGS:
                raise DescriptionError(where, f"unknown scaling '{v}'; use one of {', '.join(SCALINGS)}", key=key)
            elif key == "acc_bits":
                if arith.is_float:
                    continue
                if isinstance(v, bool) or not isinstance(v, int) or not 2 <= v <= 128:
                    raise DescriptionError(where, f"accumulator of {v} bits is out of range; use 2..128 bits",
                                           key=setting("acc_bits") if where == "<command line>" else "acc_bits")
            changes[key] = v
        arith = arith.with_(**changes)
    if structure_from is not None and arith.structure not in target.structures and arith.structure != "auto":
        raise DescriptionError(
            structure_from, f"target '{target.name}' does not support structure '{arith.structure}'; "
            f"it supports {', '.join(target.structures)} (or auto: per section, the cheapest of them)",
            key="structure", channel=structure_channel)
    if not arith.is_float and arith.data.frac_bits < 2:
        where = width_from["data"]
        raise DescriptionError(where, f"data word {arith.data} has {arith.data.frac_bits} fractional bit(s); "
                               "a data word needs at least 2 (scaling to 1 - 2 LSB of full scale needs them); "
                               "use a wider data word such as Q1.15",
                               key=setting("data") if where == "<command line>" else "data")
    if not arith.is_float and arith.product_shift and arith.product_shift >= arith.coef.frac_bits:
        where = width_from["coef"]
        raise DescriptionError(where, f"coefficient word {arith.coef} has {arith.coef.frac_bits} fractional bits, but "
                               f"target '{target.name}' rounds every product by 2^{arith.product_shift} "
                               "([arithmetic] product_shift); use a coefficient word with more than "
                               f"{arith.product_shift} fractional bits", key=setting("coef") if where == "<command line>"
                               else "coef")
    if not arith.is_float and arith.acc_bits < arith.data.width:
        where = width_from["acc_bits"] if width_from["acc_bits"] != str(target.folder / "target.toml") \
            else width_from["data"]
        raise DescriptionError(where, f"accumulator of {arith.acc_bits} bits is narrower than the "
                               f"{arith.data.width}-bit data word ({arith.data}); widen the accumulator "
                               "or narrow the data word",
                               key=setting("acc_bits") if where == "<command line>" else "acc_bits")
    check_kernel_words(arith, target, width_from)
    return arith


# ---------------------------------------------------------------------------
# Build tables: what `coefc build` needs besides the arithmetic.
#
# A target that can emit headers adds these tables to its target.toml (all are
# checked here, with the file and line of the offending key):
#
#   [c]        data_type, coef_type, state_type    C types of the containers
#   [limits]   max_data_bits, max_coef_bits, max_acc_bits
#              the widest words its kernel computes exactly
#   [layout]   section = ["b0", "b1", "b2", "a1", "a2"]  memory order of one
#              second-order section; "-a1"/"-a2" store the a terms negated (the
#              kernel then adds every product, as a MAC-only core does)
#              coef_shift = true   whether a per-operation coefficient shift is allowed
#   [memory]   alignment (bytes, power of two), linker_section ("" = default)
#   [kernel]   prefix (C prefix of the kernel's names), abi (interface version),
#              header (file the generated header includes), sources (list),
#              family (optional): the kernel is rendered from the templates
#              kernel/<family>/kernel.h.j2 and kernel.c.j2 (the target folder's
#              own file of a name wins over targets/_common's), written under the
#              names header and sources; without it they are files in the folder
#   [templates] header (Jinja2 template of the header), source (optional,
#              template of a companion .c file); looked up in the folder, then
#              in targets/_common
# ---------------------------------------------------------------------------

SECTION_TERMS = ("b0", "b1", "b2", "a1", "a2")
_IDENT_RE = re.compile(r"^[A-Za-z][A-Za-z0-9_]*$")
_SECTION_RE = re.compile(r"^[A-Za-z0-9_.$]*$")


@dataclass(frozen=True)
class BuildInfo:
    """The validated build tables of a target (see the comment above)."""

    data_type: str
    coef_type: str
    state_type: str
    max_data_bits: int
    max_coef_bits: int
    max_acc_bits: int
    section_layout: tuple[str, ...]  # e.g. ("b0", "b1", "b2", "-a1", "-a2")
    coef_shift: bool
    alignment: int
    linker_section: str
    kernel_prefix: str
    kernel_abi: int
    kernel_header: str  # relative to the target folder
    kernel_sources: tuple[str, ...]  # relative to the target folder
    header_template: str  # relative to the target folder
    source_template: str | None
    kernel_family: str | None = None  # rendered from kernel/<family>/*.j2 (None: files copied as they are)

    def kernel_files(self, folder: Path) -> tuple[Path, ...]:
        """The kernel header and sources as paths inside *folder*."""
        return tuple(folder / p for p in (self.kernel_header, *self.kernel_sources))


def key_line(path: Path, table: str, key: str) -> int | None:
    """1-based line of ``key = ...`` inside ``[table]`` of a TOML file, if found."""
    try:
        lines = path.read_text(encoding="utf-8").splitlines()
    except (OSError, UnicodeDecodeError):
        return None
    current = ""
    key_re = re.compile(r"^\s*" + re.escape(key) + r"\s*=")
    for i, line in enumerate(lines, 1):
        m = re.match(r"^\s*\[\s*([A-Za-z0-9_.\-]+)\s*\]", line)
        if m:
            current = m.group(1)
            continue
        if current == table and key_re.match(line):
            return i
    return None


MAX_ALIGNMENT = 1 << 16
_IDENT_FILE_RE = re.compile(r"^[A-Za-z0-9_][A-Za-z0-9_.-]*$")


def _contained_file(folder: Path, rel, where: str, what: str) -> Path:
    """The real path of *rel* inside target *folder*; refuse anything outside it.

    A target folder may come from anyone in a merge request: an absolute path,
    ``../`` or a symbolic link must not make ``build --kernel`` copy a file from
    elsewhere on the machine (``/proc/self/environ``) into the build output.
    """
    if not isinstance(rel, str) or not rel:
        raise TargetError(f"{where}: {what}: {rel!r} is not a file name; name a file inside {folder}")
    root = Path(os.path.realpath(folder))
    real = Path(os.path.realpath(folder / rel))
    if Path(rel).is_absolute() or not real.is_relative_to(root):
        raise TargetError(f"{where}: {what}: {rel!r} leads outside the target folder {folder}; "
                          "keep every file the target names inside its folder")
    if not real.is_file():
        raise TargetError(f"{where}: {what}: file {rel!r} not found in {folder}; fix the path")
    return real


def build_info(target: Target) -> BuildInfo:
    """Validate and return the build tables of *target* (raises TargetError)."""
    path = target.folder / "target.toml"
    raw = target.raw

    def where(table: str, key: str | None = None) -> str:
        line = key_line(path, table, key) if key else None
        if line is None and key is None:
            for i, text in enumerate(path.read_text(encoding="utf-8").splitlines(), 1):
                if text.strip() == f"[{table}]":
                    line = i
                    break
        return f"{path}:{line}" if line else str(path)

    def table(name: str) -> Mapping:
        t = raw.get(name)
        if not isinstance(t, dict):
            raise TargetError(f"{path}: target '{target.name}' has no table [{name}], so it cannot build "
                              "headers; add it (see the README section on writing a target)")
        return t

    def get(tname: str, key: str, typ, *, allowed=None, default=None, optional=False):
        t = table(tname)
        if key not in t:
            if optional:
                return default
            raise TargetError(f"{where(tname)}: [{tname}] needs key '{key}'"
                              f"{close_match(key, t.keys())}")
        v = t[key]
        if typ is int and (isinstance(v, bool) or not isinstance(v, int)):
            raise TargetError(f"{where(tname, key)}: [{tname}] key '{key}' must be an integer, got {v!r}")
        if typ is not int and not isinstance(v, typ):
            raise TargetError(f"{where(tname, key)}: [{tname}] key '{key}' must be a {typ.__name__}, got {v!r}")
        if allowed is not None and v not in allowed:
            raise TargetError(f"{where(tname, key)}: [{tname}] key '{key}' = {v!r}; use one of "
                              f"{', '.join(map(str, allowed))}")
        return v

    fixed = not target.arithmetic.is_float
    types = ("int16_t", "int32_t", "int64_t") if fixed else ("float",)
    data_type = get("c", "data_type", str, allowed=types)
    coef_type = get("c", "coef_type", str, allowed=types)
    state_type = get("c", "state_type", str, allowed=types)
    width = {"int16_t": 16, "int32_t": 32, "int64_t": 64, "float": 32}
    if fixed:
        max_data = get("limits", "max_data_bits", int)
        max_coef = get("limits", "max_coef_bits", int)
        max_acc = get("limits", "max_acc_bits", int)
        for key, v, cont in (("max_data_bits", max_data, width[data_type]),
                             ("max_coef_bits", max_coef, width[coef_type])):
            if not 2 <= v <= cont:
                raise TargetError(f"{where('limits', key)}: [limits] {key} = {v} does not fit the "
                                  f"{cont}-bit container of [c]; use 2..{cont}")
        if not 2 <= max_acc <= 64 or max_acc > width[state_type]:
            raise TargetError(f"{where('limits', 'max_acc_bits')}: [limits] max_acc_bits = {max_acc}; "
                              f"use 2..{min(64, width[state_type])} (the state word must hold an accumulator)")
        a = target.arithmetic
        for key, bits, lim in (("data", a.data.width, max_data), ("coef", a.coef.width, max_coef),
                               ("acc_bits", a.acc_bits, max_acc)):
            if bits > lim:
                raise TargetError(f"{where('arithmetic', key)}: [arithmetic] {key} is {bits} bits wide but "
                                  f"[limits] allows at most {lim}; make them agree")
    else:
        max_data = max_coef = max_acc = 32
    layout = get("layout", "section", list)
    terms = [str(t).lstrip("-") for t in layout]
    if (sorted(terms) != sorted(SECTION_TERMS) or any(not isinstance(t, str) for t in layout)
            or any(t.startswith("-") and t[1:] not in ("a1", "a2") for t in layout)):
        raise TargetError(f"{where('layout', 'section')}: [layout] section = {layout!r} must list each of "
                          "b0 b1 b2 a1 a2 once, in memory order ('-a1'/'-a2' store a negated)")
    coef_shift = get("layout", "coef_shift", bool, default=True, optional=True)
    alignment = get("memory", "alignment", int, default=0, optional=True)
    if alignment < 0 or (alignment & (alignment - 1)) or alignment > MAX_ALIGNMENT:
        raise TargetError(f"{where('memory', 'alignment')}: [memory] alignment = {alignment}; "
                          f"use 0 (none) or a power of two up to {MAX_ALIGNMENT}")
    section = get("memory", "linker_section", str, default="", optional=True)
    if not _SECTION_RE.match(section):
        raise TargetError(f"{where('memory', 'linker_section')}: [memory] linker_section = {section!r}; "
                          "use letters, digits, '_', '.' and '$' only")
    prefix = get("kernel", "prefix", str)
    if not _IDENT_RE.match(prefix):
        raise TargetError(f"{where('kernel', 'prefix')}: [kernel] prefix = {prefix!r} is not a C identifier")
    abi = get("kernel", "abi", int)
    header = get("kernel", "header", str)
    sources = get("kernel", "sources", list, default=[], optional=True)
    family = get("kernel", "family", str, optional=True)
    if family is not None and not _IDENT_RE.match(family):
        raise TargetError(f"{where('kernel', 'family')}: [kernel] family = {family!r}; name a folder of "
                          "kernel templates such as \"fixed\" (letters, digits, '_')")
    header_t = get("templates", "header", str)
    source_t = get("templates", "source", str, optional=True)
    files = [("templates", "header", header_t)] + ([("templates", "source", source_t)] if source_t else [])
    if family is None:
        files += [("kernel", "header", header)] + [("kernel", "sources", s) for s in sources]
    else:  # rendered under these names: they need not exist, but stay inside the folder
        for key, rel in [("header", header)] + [("sources", s) for s in sources]:
            real = Path(os.path.realpath(target.folder / rel)) if isinstance(rel, str) else None
            if real is None or Path(rel).is_absolute() or not real.is_relative_to(os.path.realpath(target.folder)):
                raise TargetError(f"{where('kernel', key)}: [kernel] {key}: {rel!r} leads outside the target folder "
                                  f"{target.folder}; keep every file the target names inside its folder")
    for tname, key, rel in files:
        try:
            _contained_file(target.folder, rel, where(tname, key), f"[{tname}] {key}")
        except TargetError:
            if tname != "templates" or not isinstance(rel, str) or not (common_dir() / rel).is_file():
                raise
            _contained_file(common_dir(), rel, where(tname, key), f"[{tname}] {key}")
    for key, rel, suffix in [("header", header, ".h")] + [("sources", s, ".c") for s in sources]:
        if not Path(rel).name.endswith(suffix) or not _IDENT_FILE_RE.match(Path(rel).name):
            raise TargetError(f"{where('kernel', key)}: [kernel] {key}: {rel!r} is copied beside the header, so "
                              f"it must be a plain C file name ending in {suffix} (letters, digits, '_', '-', '.')")
    return BuildInfo(data_type=data_type, coef_type=coef_type, state_type=state_type,
                     max_data_bits=max_data, max_coef_bits=max_coef, max_acc_bits=max_acc,
                     section_layout=tuple(layout), coef_shift=coef_shift, alignment=alignment,
                     linker_section=section, kernel_prefix=prefix, kernel_abi=abi,
                     kernel_header=header, kernel_sources=tuple(sources),
                     header_template=header_t, source_template=source_t, kernel_family=family)


#: The tables that make a target buildable; a target with none of them is a
#: check-only target (analysed against its arithmetic, never built).
BUILD_TABLES = ("c", "limits", "layout", "memory", "kernel", "templates")


def kernel_info(target: Target) -> BuildInfo | None:
    """The validated build tables of *target*, or ``None`` for a check-only target.

    A target that states any build table claims a kernel, so its tables must be
    whole and valid (TargetError otherwise): ``coefc build`` would refuse it, and
    ``coefc check`` refuses it the same way.
    """
    if not any(t in target.raw for t in BUILD_TABLES):
        return None
    return build_info(target)


def check_kernel_words(arith: Arithmetic, target: Target, places: Mapping[str, str] | None = None) -> None:
    """Refuse words wider than the target's kernel computes ([limits]); the one place of this rule.

    *places* maps ``data``, ``coef`` and ``acc_bits`` to where each width was set
    (a description file or ``"<command line>"``); the error names that place, the
    widest word the kernel takes and the option or key that fixes it.  Float32
    targets and check-only targets (no build tables) have nothing to refuse.
    """
    if arith.is_float:
        return
    info = kernel_info(target)
    if info is None:
        return
    places = places or {}
    toml = str(target.folder / "target.toml")
    for key, what, bits, lim in (("data", "data word", arith.data.width, info.max_data_bits),
                                 ("coef", "coefficient word", arith.coef.width, info.max_coef_bits),
                                 ("acc_bits", "accumulator", arith.acc_bits, info.max_acc_bits)):
        if bits <= lim:
            continue
        where = places.get(key, toml)
        if key == "acc_bits":
            name, fix = f"the {bits}-bit {what}", f"{lim} or fewer"
        else:
            fmt = arith.data if key == "data" else arith.coef
            name = f"the {what} {fmt} ({bits} bits)"
            fix = (str(QFormat(fmt.int_bits, lim - fmt.int_bits)) if lim > fmt.int_bits
                   else f"at most {lim} bits")
        if where == "<command line>":
            hint, k = f"narrow it ({setting(key)} {fix.replace(' or fewer', '')})", setting(key)
        elif where == toml:
            hint, k = f"make [arithmetic] {key} and [limits] agree", key
        else:
            hint, k = f"narrow [implementation] {key} to {fix}", key
        raise DescriptionError(where, f"{name} is wider than the kernel of target "
                               f"'{target.name}' handles: at most {lim}; {hint} or choose a target "
                               "whose kernel computes wider words", key=k)
