"""Writing files safely: all or nothing."""

from __future__ import annotations

import os
import tempfile
from pathlib import Path

from .errors import CoefcError


def write_atomic(path: Path, data: str | bytes) -> None:
    """Write *data* to *path* through a temporary file and an atomic rename.

    A crash or an error at any point leaves either the old file or the new one,
    never a half-written file.
    """
    path = Path(path)
    folder = path.parent if str(path.parent) else Path(".")
    if not folder.is_dir():
        raise CoefcError(f"{path}: folder '{folder}' does not exist; create it or choose another output path")
    raw = data.encode("utf-8") if isinstance(data, str) else data
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=folder)
    try:
        with os.fdopen(fd, "wb") as f:
            f.write(raw)
            f.flush()
            os.fsync(f.fileno())
        os.replace(tmp, path)
    except BaseException:
        try:
            os.unlink(tmp)
        except FileNotFoundError:
            pass
        raise
