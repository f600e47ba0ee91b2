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

__all__ = ["staged_folder", "check_output_folder", "write_text", "write_files"]


def check_output_folder(path, *, force=False, inputs=()):
    """Refuse, before any work, an output path the staged replace cannot take safely: a file,
    a non-empty folder without ``force``, the current folder or one holding it, a mount point,
    a symbolic link, or a folder holding one of ``inputs`` (files it would delete)."""
    path = Path(path)
    if path.is_symlink():
        raise InputError("is a symbolic link; the new folder would replace the link, not fill "
                         "its target: give the target's own path as --out", source=path)
    if path.exists() and not path.is_dir():
        raise InputError("is a file, not a folder; choose another --out", source=path)
    target = path.resolve()
    here = Path.cwd().resolve()
    if target == here or target in here.parents:
        raise InputError("is the current folder or holds it, which cannot be replaced in one "
                         "rename; give a new subfolder as --out (e.g. --out build)", source=path)
    if target.parent == target or os.path.ismount(target):
        raise InputError("is a mount point or the root, which cannot be replaced in one "
                         "rename; give a subfolder as --out", source=path)
    if path.is_dir() and any(path.iterdir()) and not force:
        raise InputError("exists and is not empty; choose another --out or pass --force "
                         "to replace it", source=path)
    for name in inputs:
        if name is not None and target in Path(name).resolve().parents:
            raise InputError(f"holds the input file {name}, which replacing the folder would "
                             f"delete; move it out first or choose another --out", source=path)


@contextmanager
def staged_folder(path, *, force=False):
    """Yield a temporary folder; on success it replaces ``path`` in one rename."""
    given = Path(path)
    check_output_folder(given, force=force)
    path = given.resolve()         # "out/.." and friends: the folder's real name and parent
    parent = path.parent
    try:
        parent.mkdir(parents=True, exist_ok=True)
        staging = Path(tempfile.mkdtemp(prefix=f".{path.name}.partial-", dir=parent))
        staging.chmod(0o777 & ~_umask())   # mkdtemp makes it private; the output should not be
    except OSError as error:
        raise InputError(f"cannot create the output folder: {error.strerror}",
                         source=given) from None
    try:
        yield staging
    except BaseException:
        shutil.rmtree(staging, ignore_errors=True)
        raise
    old = None
    try:
        if path.exists():
            old = Path(tempfile.mkdtemp(prefix=f".{path.name}.old-", dir=parent))
            os.rename(path, old / "previous")
        os.rename(staging, path)
    except OSError as error:
        # A folder that cannot be moved (no write permission on it, another device): put back
        # what was moved, remove the new files, and say so.
        shutil.rmtree(staging, ignore_errors=True)
        if old is not None and (old / "previous").exists():
            os.rename(old / "previous", path)   # it was just moved from there: it can go back
        if old is not None:
            old.rmdir()
        raise InputError(f"cannot replace the folder ({error.strerror}); choose another --out",
                         source=given) from None
    if old is not None:
        shutil.rmtree(old, ignore_errors=True)


def write_text(path, text):
    """Write a text file with Unix newlines, whatever the platform."""
    Path(path).write_text(text, encoding="utf-8", newline="\n")


def write_files(contents, *, force=False):
    """Write several files so that each appears whole, and none if any is refused.

    ``contents`` maps paths to text. Existing files are replaced only with ``force``.
    """
    paths = [Path(p) for p in contents]
    for path in paths:
        if path.is_dir():
            raise InputError("is a folder; give a file name", source=path)
        if path.exists() and not force:
            raise InputError("exists; choose another name or pass --force to replace it",
                             source=path)
        if not path.parent.is_dir():
            raise InputError(f"folder {path.parent} does not exist", source=path)
    staged = []
    try:
        for path, text in zip(paths, contents.values()):
            handle, name = tempfile.mkstemp(prefix=f".{path.name}.partial-", dir=path.parent)
            with os.fdopen(handle, "w", encoding="utf-8", newline="\n") as stream:
                stream.write(text)
            os.chmod(name, 0o666 & ~_umask())
            staged.append((name, path))
    except BaseException:
        for name, _ in staged:
            os.unlink(name)
        raise
    for name, path in staged:
        os.replace(name, path)


def _umask():
    mask = os.umask(0)
    os.umask(mask)
    return mask
