"""Writing output files atomically: a temp file in the same folder, fsync, rename.

Nothing half-written is left behind on error, and an existing file is only
replaced when the caller says so.
"""

from __future__ import annotations

import contextlib
import os
import tempfile
from pathlib import Path

from chargeplan.errors import InputError

__all__ = ["write_atomic"]


def write_atomic(path: str | Path, data: str | bytes, *, force: bool = False) -> Path:
    """Write ``data`` to ``path`` atomically; refuse to replace a file unless ``force``."""
    target = Path(path)
    shown = str(target)
    if target.is_dir():
        raise InputError("is a folder", file=shown, fix="give a file name to write to")
    if (target.exists() or target.is_symlink()) and not force:
        raise InputError("already exists", file=shown, fix="add --force to replace it")
    if target.is_symlink():
        raise InputError("is a symbolic link; chargeplan does not write through links",
                         file=shown, fix="remove the link or choose another name")
    folder = target.parent if str(target.parent) else Path(".")
    if not folder.is_dir():
        raise InputError("its folder does not exist", file=shown, fix="create the folder first")
    payload = data.encode("utf-8") if isinstance(data, str) else data
    try:
        handle, temp_name = tempfile.mkstemp(prefix=f".{target.name}.", suffix=".tmp",
                                             dir=folder)
    except OSError as error:
        raise InputError(f"cannot write there ({error.strerror})", file=shown,
                         fix="check the folder's permissions") from None
    try:
        with os.fdopen(handle, "wb") as stream:
            stream.write(payload)
            stream.flush()
            os.fsync(stream.fileno())
        os.replace(temp_name, target)
    except BaseException as error:
        with contextlib.suppress(OSError):
            os.unlink(temp_name)
        if isinstance(error, OSError):
            raise InputError(f"cannot write it ({error.strerror})", file=shown,
                             fix="check the disk and the folder's permissions") from None
        raise
    return target
