"""Build hook for the compiled bit-true engine core (compiler/coefc/_engine.c).

Everything else about the package is declared in pyproject.toml.  The engine core
is plain C against the CPython buffer protocol: it needs a C compiler at install
time (gcc on Linux) and no third-party headers.
"""
from setuptools import Extension, find_packages, setup

setup(
    ext_modules=[
        Extension(
            "coefc._engine",
            sources=["compiler/coefc/_engine.c"],
            extra_compile_args=["-O2", "-ffp-contract=off", "-std=c99"],
        )
    ],
    packages=find_packages("compiler") + ["coefc._builtin_targets"],
)
