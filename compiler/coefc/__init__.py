"""coefc: coefficient compiler and fixed-point quantisation checker for embedded DSP.

Public API (see :mod:`coefc.api`): :func:`load` a description, ``.design()`` it,
``.realise()`` it on a target, ``.simulate()`` the bit-true program.
"""

__version__ = "0.1.0"

from .api import Design, Loaded, Realisation, load
from .errors import CoefcError, DataError, DescriptionError, TargetError

__all__ = ["__version__", "load", "Loaded", "Design", "Realisation",
           "CoefcError", "DescriptionError", "TargetError", "DataError"]
