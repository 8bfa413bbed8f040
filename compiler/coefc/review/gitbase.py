"""The old side of a comparison from a git revision: ``git show REV:path`` of the same file.

Runs the ``git`` program (never a library), in the folder of the file, so the
path is taken relative to the top of its repository.  Every failure is one
:class:`coefc.errors.CoefcError` line: git missing, the file outside a git
repository, an unknown revision.  A file that the revision does not hold is not
an error: :func:`read_at_revision` returns ``None`` (the file is new).
"""

from __future__ import annotations

import shutil
import subprocess
from pathlib import Path

from ..errors import CoefcError, setting

_TIMEOUT_S = 60


def _git(args, cwd: Path) -> subprocess.CompletedProcess:
    exe = shutil.which("git")
    if exe is None:
        raise CoefcError(setting("base") + ": the git program is not installed or not on PATH; install git, or give "
                         "OLD.toml NEW.toml instead")
    try:
        return subprocess.run([exe, *args], cwd=cwd, capture_output=True, timeout=_TIMEOUT_S,
                              env={**_clean_env(), "GIT_TERMINAL_PROMPT": "0", "LC_ALL": "C"})
    except subprocess.TimeoutExpired:
        raise CoefcError(f"{setting('base')}: git did not answer within {_TIMEOUT_S} s in {cwd}; try again") from None
    except OSError as e:
        raise CoefcError(f"{setting('base')}: cannot run git ({e.strerror or e}); check the git installation") from None


def _clean_env() -> dict:
    import os

    # a GIT_DIR or GIT_WORK_TREE set for another repository would answer for that one
    return {k: v for k, v in os.environ.items() if k not in ("GIT_DIR", "GIT_WORK_TREE", "GIT_INDEX_FILE")}


def read_at_revision(path, rev: str) -> tuple[bytes | None, str]:
    """The bytes of *path* as revision *rev* holds it, and the name ``REV:relative/path``.

    ``None`` for the bytes when the revision has no such file.

    Raises
    ------
    CoefcError
        git missing, *path* outside a git repository, *rev* unknown.
    """
    if not rev or rev.startswith("-") or any(c in rev for c in "\n\r\0"):
        raise CoefcError(f"{setting('base')} '{rev}': not a revision; name a commit, branch or tag (e.g. origin/main)")
    p = Path(path)
    folder = p.parent if str(p.parent) else Path(".")
    if not folder.is_dir():
        raise CoefcError(f"{path}: its folder {folder} does not exist; check the path")
    top = _git(["rev-parse", "--show-toplevel"], folder)
    if top.returncode != 0:
        raise CoefcError(f"{path}: not inside a git repository, so {setting('base')} {rev} has no old version to read; "
                         "run it inside the repository or give OLD.toml NEW.toml")
    root = Path(top.stdout.decode("utf-8", "surrogateescape").strip())
    if _git(["rev-parse", "--verify", "--quiet", "--end-of-options", f"{rev}^{{commit}}"], folder).returncode != 0:
        raise CoefcError(f"{setting('base')} {rev}: unknown revision in {root}; name a commit, branch or tag that exists "
                         "there (git log shows them; in CI fetch the base branch first)")
    try:
        rel = p.resolve().relative_to(root.resolve()).as_posix()
    except ValueError:
        raise CoefcError(f"{path}: outside the git repository at {root}; {setting('base')} reads files of that repository "
                         "only") from None
    name = f"{rev}:{rel}"
    if _git(["cat-file", "-e", name], root).returncode != 0:
        return None, name
    shown = _git(["cat-file", "blob", name], root)
    if shown.returncode != 0:
        msg = shown.stderr.decode("utf-8", "replace").strip().splitlines()
        raise CoefcError(f"{setting('base')}: git cannot read {name}" + (f" ({msg[-1]})" if msg else "") + "; check the path")
    return shown.stdout, name
