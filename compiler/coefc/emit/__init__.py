"""Emission: a realisation (and its check report) in, C text out.

``header`` writes the table header through a target's templates, ``codegen`` the
generated code of ``coefc build --kernel``, and ``buildable`` holds every rule by which
``build`` refuses a program its kernel cannot run.
"""
