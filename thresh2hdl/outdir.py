"""Output folders that appear whole or not at all.

Files are written into a hidden sibling folder, which is renamed into place only when every file
is written; on any error or interrupt the partial folder is removed and a previous output stays
as it was. A non-empty existing folder is replaced only with ``force``.
"""

import os
import shutil
import tempfile
from contextlib import contextmanager
from pathlib import Path

from .errors import InputError

__all__ = ["staged_folder", "check_output_folder", "write_text"]


def check_output_folder(path, *, force=False):
    """Refuse, before any work, an output path that is a file or a non-empty folder."""
    path = Path(path)
    if path.exists() and not path.is_dir():
        raise InputError("is a file, not a folder; choose another --out", source=path)
    if path.is_dir() and any(path.iterdir()) and not force:
        raise InputError("exists and is not empty; choose another --out or pass --force "
                         "to replace it", source=path)


@contextmanager
def staged_folder(path, *, force=False):
    """Yield a temporary folder; on success it replaces ``path`` in one rename."""
    path = Path(path)
    check_output_folder(path, force=force)
    parent = path.parent if str(path.parent) else Path(".")
    try:
        parent.mkdir(parents=True, exist_ok=True)
        staging = Path(tempfile.mkdtemp(prefix=f".{path.name}.partial-", dir=parent))
        umask = os.umask(0)
        os.umask(umask)
        staging.chmod(0o777 & ~umask)   # mkdtemp makes it private; the output should not be
    except OSError as error:
        raise InputError(f"cannot create the output folder: {error.strerror}",
                         source=path) from None
    try:
        yield staging
    except BaseException:
        shutil.rmtree(staging, ignore_errors=True)
        raise
    old = None
    if path.exists():
        old = Path(tempfile.mkdtemp(prefix=f".{path.name}.old-", dir=parent))
        os.rename(path, old / "previous")
    os.rename(staging, path)
    if old is not None:
        shutil.rmtree(old, ignore_errors=True)


def write_text(path, text):
    """Write a text file with Unix newlines, whatever the platform."""
    Path(path).write_text(text, encoding="utf-8", newline="\n")
