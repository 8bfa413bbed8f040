"""Build hook for the compiled bit-true engine core (compiler/coefc/_engine.c).

Everything else about the package is declared in pyproject.toml.  The engine core
is plain C against the CPython buffer protocol: it needs a C compiler at install
time (gcc on Linux) and no third-party headers.
"""
from pathlib import Path

from setuptools import Extension, find_packages, setup


def builtin_target_packages() -> list[str]:
    """targets/ and every folder below it, shipped as coefc._builtin_targets.*.

    Listing the data-only folders as (namespace) packages keeps setuptools from
    warning about package data outside any package.
    """
    root = Path(__file__).parent / "targets"
    out = ["coefc._builtin_targets"]
    for d in sorted(p for p in root.rglob("*") if p.is_dir() and p.name != "__pycache__"):
        out.append("coefc._builtin_targets." + ".".join(d.relative_to(root).parts))
    return out


setup(
    ext_modules=[
        Extension(
            "coefc._engine",
            sources=["compiler/coefc/_engine.c"],
            extra_compile_args=["-O2", "-ffp-contract=off", "-std=c99"],
        )
    ],
    packages=find_packages("compiler") + builtin_target_packages(),
)
