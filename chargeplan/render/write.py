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

__all__ = ["write_all", "write_atomic"]


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


def write_all(folder: str | Path, files: dict[str, str | bytes], *, force: bool = False) -> None:
    """Write several files into ``folder``: all targets are checked before the first write,
    so an error leaves nothing half-done; each file is written atomically."""
    out = Path(folder)
    if out.is_symlink() or (out.exists() and not out.is_dir()):
        raise InputError("is not a folder", file=str(out), fix="give a folder to write into")
    if not out.exists():
        try:
            out.mkdir(parents=True)
        except OSError as error:
            raise InputError(f"cannot create it ({error.strerror})", file=str(out),
                             fix="check the path and its permissions") from None
    for name in files:
        target = out / name
        if target.is_symlink():
            raise InputError("is a symbolic link; chargeplan does not write through links",
                             file=str(target), fix="remove the link")
        if target.exists() and not force:
            raise InputError("already exists", file=str(target), fix="add --force to replace it")
    for name, data in files.items():
        write_atomic(out / name, data, force=True)
