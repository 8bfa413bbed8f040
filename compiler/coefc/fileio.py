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
        # mkstemp makes the file private (0600); give it the mode a plain open()
        # would: the old file's mode, or 0666 less the umask.
        try:
            mode = path.stat().st_mode & 0o7777
        except OSError:
            umask = os.umask(0)
            os.umask(umask)
            mode = 0o666 & ~umask
        os.chmod(tmp, mode)
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
