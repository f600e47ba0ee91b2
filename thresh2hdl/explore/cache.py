"""Finished work on disk, found by the content it was made from.

A task's key is the SHA-256 of its inputs as canonical JSON (the model's text, the options,
the tool versions, thresh2hdl's version), so an interrupted sweep finds what it finished, a
widened grid reuses its old points, and anything that changes a result misses. A finished
point is ``<key>.json`` (its record) beside ``<key>/`` (its build folder, when it has one);
the folder is put in place first and the record last, each whole (a rename), so a record on
disk always has its folder. A failed task is kept apart (``<key>.failed.json``, its error)
and is tried again by the next run.
"""

import hashlib
import json
import shutil
from pathlib import Path

from ..errors import InputError
from ..outdir import staged_folder, write_files

__all__ = ["TaskCache", "content_key"]


def content_key(inputs):
    """SHA-256 of ``inputs`` (JSON-serialisable) written canonically."""
    text = json.dumps(inputs, sort_keys=True, separators=(",", ":"), ensure_ascii=True)
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


class TaskCache:
    """The finished tasks of one folder."""

    def __init__(self, folder):
        self.folder = Path(folder)
        try:
            self.folder.mkdir(parents=True, exist_ok=True)
        except OSError as error:
            raise InputError(f"cannot create the cache folder: {error.strerror}",
                             source=self.folder) from None

    def record(self, key):
        """The finished record of ``key``, or None (never a failed one)."""
        path = self.folder / f"{key}.json"
        if not path.is_file():
            return None
        try:
            return json.loads(path.read_text(encoding="utf-8"))
        except (OSError, ValueError):
            return None            # unreadable: computed again, and replaced

    def files(self, key):
        """The build folder kept with ``key``'s record (None: none was kept)."""
        folder = self.folder / key
        return folder if folder.is_dir() else None

    def store(self, key, record, files=None):
        """Keep a finished record, and ``files`` ({name: bytes}) as its build folder."""
        if files is not None:
            with staged_folder(self.folder / key, force=True) as staging:
                for name, content in sorted(files.items()):
                    (staging / Path(name).name).write_bytes(content)
        write_files({self.folder / f"{key}.json": json.dumps(record, indent=1,
                                                             sort_keys=True) + "\n"},
                    force=True)
        (self.folder / f"{key}.failed.json").unlink(missing_ok=True)

    def store_failure(self, key, error, inputs_label):
        """Keep a failed task's error, for the user to read; it is no result."""
        write_files({self.folder / f"{key}.failed.json": json.dumps(
            {"error": error, "what": inputs_label}, indent=1, sort_keys=True) + "\n"},
            force=True)

    def copy_folder(self, key, destination):
        """``key``'s build folder, copied whole into ``destination`` (replaced in one rename)."""
        source = self.files(key)
        with staged_folder(destination, force=True) as staging:
            for path in sorted(source.iterdir()):
                shutil.copy2(path, staging / path.name)
