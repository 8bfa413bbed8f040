"""Writing files safely: an output path and its bytes in, the whole file (or nothing) out.

:func:`check_output` validates an output path before any slow work starts (its
folder exists, it is not a folder, it is not one of the command's inputs);
:func:`write_atomic` writes through a temporary file and an atomic rename.  Every
problem is a :class:`coefc.errors.CoefcError` naming the path and the fix.

Special files are never replaced: a symbolic link is written through to the
file it names (atomically there), a FIFO or character device (``/dev/null``,
``/dev/stdout``, a pipe) is streamed to, and a block device or socket is refused.
Only a regular file (or a path that does not exist yet) is ever renamed over.
"""

from __future__ import annotations

import os
import stat
import tempfile
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path

from ..errors import CoefcError


def _same_file(a: Path, b: Path) -> bool:
    try:
        return a.exists() and b.exists() and os.path.samefile(a, b)
    except OSError:
        return False


def check_output(path, inputs=(), what: str = "output") -> Path:
    """Refuse an output *path* that cannot be written or would destroy an input.

    Parameters
    ----------
    path : path-like
        The file about to be written.
    inputs : iterable of path-like
        Files the command reads (the description, sample input); writing over
        one of them would lose it.
    what : str
        What the file is, for the message (``"output"``, ``"JSON report"`` ...).

    Raises
    ------
    CoefcError
        When the folder is missing, the path is a folder, or it is an input.
    """
    path = Path(path)
    if _stream_target(path):
        return path
    path = _resolved(path)
    folder = path.parent if str(path.parent) else Path(".")
    if path.is_dir():
        raise CoefcError(f"{path}: is a folder; give the {what} a file name inside it")
    if not folder.is_dir():
        raise CoefcError(f"{path}: folder '{folder}' does not exist; create it or choose another output path")
    for inp in inputs:
        if inp is not None and _same_file(path, Path(inp)):
            raise CoefcError(f"{path}: is also an input of this command and would be overwritten; "
                             f"choose another {what} path")
    return path


def _resolved(path: Path) -> Path:
    """*path* with every symbolic link followed (the file a write really lands in)."""
    return Path(os.path.realpath(path)) if path.is_symlink() else path


def _stream_target(path: Path) -> bool:
    """True for an existing FIFO or character device (written to, never replaced).

    Raises :class:`CoefcError` for a block device or a socket: no report belongs there.
    """
    try:
        mode = os.stat(path).st_mode  # follows links: what a write would reach
    except OSError:
        return False
    if stat.S_ISFIFO(mode) or stat.S_ISCHR(mode):
        return True
    if stat.S_ISBLK(mode) or stat.S_ISSOCK(mode):
        kind = "a block device" if stat.S_ISBLK(mode) else "a socket"
        raise CoefcError(f"{path}: is {kind}; write the output to a regular file, a pipe or /dev/stdout")
    return False


def _stream(src: Path, dest: Path) -> None:
    """Copy the finished temporary file *src* into the FIFO or device *dest*."""
    with open(src, "rb") as f, open(dest, "wb") as out:
        while chunk := f.read(1 << 20):
            out.write(chunk)


@contextmanager
def atomic_path(path) -> Iterator[Path]:
    """A temporary path beside *path* (same suffix) for a writer that wants a file name.

    On success the temporary file replaces *path* atomically; on any error it is
    removed and *path* is left as it was.  OS errors become :class:`CoefcError`.
    A symbolic link is followed and its target replaced; a FIFO or character
    device gets the finished bytes streamed into it (the temporary file then
    lives in the system's temporary folder).
    """
    path = check_output(path)
    streamed = _stream_target(path)
    folder = Path(tempfile.gettempdir()) if streamed else path.parent if str(path.parent) else Path(".")
    try:
        fd, tmp = tempfile.mkstemp(prefix=f".{path.stem}.", suffix=path.suffix, dir=folder)
        os.close(fd)
    except OSError as e:
        raise CoefcError(f"{path}: cannot create a file in folder '{folder}' ({e.strerror or e}); "
                         "check the folder's permissions or choose another output path") from None
    try:
        yield Path(tmp)
        if streamed:
            _stream(Path(tmp), path)
            os.unlink(tmp)
        else:
            os.chmod(tmp, _plain_mode(path))
            os.replace(tmp, path)
    except BaseException as e:
        try:
            os.unlink(tmp)
        except FileNotFoundError:
            pass
        if isinstance(e, OSError):
            raise CoefcError(f"{path}: cannot write ({e.strerror or e}); check the folder's permissions "
                             "and free space, or choose another output path") from None
        raise


def _plain_mode(path: Path) -> int:
    """The mode a plain open() would give: the old file's mode, or 0666 less the umask."""
    try:
        return path.stat().st_mode & 0o7777
    except OSError:
        umask = os.umask(0)
        os.umask(umask)
        return 0o666 & ~umask


def write_atomic(path: Path, data: str | bytes) -> None:
    """Write *data* to *path* through a temporary file and an atomic rename.

    A crash or an error at any point leaves either the old file or the new one,
    never a half-written file; no temporary file is left behind.  Special files
    are kept (see the module docstring): a FIFO or character device is written to
    directly, a symbolic link's target is replaced.

    Raises
    ------
    CoefcError
        When the path is a folder, its folder is missing, or the system refuses
        the write (permissions, full disk); the message names the path.
    """
    raw = data.encode("utf-8") if isinstance(data, str) else data
    path = check_output(path)
    if _stream_target(path):
        try:
            with open(path, "wb") as out:
                out.write(raw)
        except OSError as e:
            raise CoefcError(f"{path}: cannot write ({e.strerror or e}); choose another output path") from None
        return
    with atomic_path(path) as tmp:
        with open(tmp, "wb") as f:
            f.write(raw)
            f.flush()
            os.fsync(f.fileno())
