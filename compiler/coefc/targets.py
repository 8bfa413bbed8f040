"""Targets: folders with a ``target.toml`` that states a chip's arithmetic exactly.

Search order for a target name: each ``--target-dir`` given (in order), then the
folders listed in the environment variable ``COEFC_TARGET_PATH`` (``os.pathsep``
separated), then the built-in targets shipped inside the package.  A folder is a
target when it contains ``target.toml``; a search directory may be a target itself
or hold target folders.
"""

from __future__ import annotations

import os
import tomllib
from collections.abc import Iterable, Mapping
from dataclasses import dataclass, field
from importlib import resources
from pathlib import Path
from types import MappingProxyType

from .errors import DescriptionError, TargetError, close_match
from .program import KINDS, SCALINGS, STRUCTURES, Arithmetic
from .qformat import OVERFLOW_MODES, ROUNDING_MODES, QFormat

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


def builtin_dir() -> Path:
    """The folder of the built-in targets (``targets/`` in a checkout)."""
    return Path(str(resources.files("coefc._builtin_targets")))


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


def list_targets(extra_dirs: Iterable[str | os.PathLike] = ()) -> list[Target]:
    """Every target visible, first occurrence of a name winning."""
    seen: dict[str, Target] = {}
    for d in search_dirs(extra_dirs):
        if not Path(d).exists() and Path(d) != builtin_dir():
            raise TargetError(f"{d}: target directory does not exist; fix --target-dir or {ENV_VAR}")
        for folder in _target_folders(Path(d)):
            if folder.name not in seen:
                seen[folder.name] = load_target(folder)
    return list(seen.values())


def find_target(name: str, extra_dirs: Iterable[str | os.PathLike] = ()) -> Target:
    for d in search_dirs(extra_dirs):
        for folder in _target_folders(Path(d)):
            if folder.name == name:
                return load_target(folder)
    names = [t.name for t in list_targets(extra_dirs)]
    raise TargetError(
        f"no target '{name}'{close_match(name, names)}; known targets: {', '.join(names)} "
        f"(add folders with --target-dir or {ENV_VAR})"
    )


def load_target(folder: Path) -> Target:
    """Load and validate ``folder/target.toml``."""
    path = folder / "target.toml"
    try:
        raw = tomllib.loads(path.read_text(encoding="utf-8"))
    except tomllib.TOMLDecodeError as e:
        raise TargetError(f"{path}: {e}; fix the TOML syntax") from None
    except (OSError, UnicodeDecodeError) as e:
        raise TargetError(f"{path}: cannot read ({e})") from None
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
            raise TargetError(f"{path}: [arithmetic] key '{key}' = {v!r}; use one of {', '.join(allowed)}")
        return v

    kind = get("kind", KINDS, default="fixed")
    structures = ar.get("structures", ["df1"])
    if not isinstance(structures, list) or not structures or any(s not in STRUCTURES for s in structures):
        raise TargetError(f"{path}: [arithmetic] structures must be a non-empty list drawn from {', '.join(STRUCTURES)}")
    structure = get("structure", STRUCTURES, default=structures[0])
    scaling = get("scaling", SCALINGS, default="none")
    if kind == "float32":
        arith = Arithmetic(kind="float32", structure=structure, data=None, coef=None, acc_bits=32,
                           rounding="nearest", overflow="saturate", scaling=scaling)
    else:
        try:
            data = QFormat.parse(get("data"))
            coef = QFormat.parse(get("coef"))
        except ValueError as e:
            raise TargetError(f"{path}: [arithmetic] {e}") from None
        acc = get("acc_bits", typ=int)
        if not 2 <= acc <= 128:
            raise TargetError(f"{path}: [arithmetic] acc_bits = {acc}; use 2..128")
        arith = Arithmetic(kind="fixed", structure=structure, data=data, coef=coef, acc_bits=acc,
                           rounding=get("rounding", ROUNDING_MODES), overflow=get("overflow", OVERFLOW_MODES),
                           scaling=scaling)
    return Target(name=folder.name, folder=folder, summary=str(raw.get("summary", "")),
                  arithmetic=arith, structures=tuple(structures), raw=MappingProxyType(raw))


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
                       source: str = "<description>") -> Arithmetic:
    """Target defaults, then the description's ``[implementation]``, then CLI overrides.

    One options schema, several ways to set it, same effect however given.
    """
    arith = target.arithmetic
    layers = [(implementation, source)]
    if overrides is not None:
        layers.append((overrides, "<command line>"))
    for layer, where in layers:
        changes = {}
        for key in ("structure", "data", "coef", "acc_bits", "rounding", "overflow", "scaling"):
            v = getattr(layer, key, None)
            if v is None:
                continue
            if key in ("data", "coef"):
                if arith.is_float:
                    continue  # float32 targets have no Q formats
                try:
                    v = QFormat.parse(v)
                except ValueError as e:
                    raise DescriptionError(where, str(e), key=key) from None
            elif key == "structure" and v not in target.structures:
                raise DescriptionError(
                    where, f"target '{target.name}' does not support structure '{v}'; "
                    f"it supports {', '.join(target.structures)}", key=key)
            elif key == "rounding" and v not in ROUNDING_MODES:
                raise DescriptionError(where, f"unknown rounding '{v}'; use one of {', '.join(ROUNDING_MODES)}", key=key)
            elif key == "overflow" and v not in OVERFLOW_MODES:
                raise DescriptionError(where, f"unknown overflow '{v}'; use one of {', '.join(OVERFLOW_MODES)}", key=key)
            elif key == "scaling" and v not in SCALINGS:
                raise DescriptionError(where, f"unknown scaling '{v}'; use one of {', '.join(SCALINGS)}", key=key)
            elif key == "acc_bits" and arith.is_float:
                continue
            changes[key] = v
        arith = arith.with_(**changes)
    if not arith.is_float and arith.acc_bits < arith.data.width:
        raise DescriptionError(source, f"accumulator of {arith.acc_bits} bits is narrower than the "
                               f"{arith.data.width}-bit data word; widen acc_bits", key="acc_bits")
    return arith
