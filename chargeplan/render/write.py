"""Writing output: single files atomically, output folders whole.

A single file (:func:`write_atomic`) is written to a temp file in the same folder, synced and
renamed over the target.

An output folder (:func:`write_all`, for ``storage -o`` and ``bench -o``) is written whole:
every file goes into a staging folder beside the target, the files and the folder are
synced, and the staging folder is then swapped into place, with ``renameat2(RENAME_EXCHANGE)``
on Linux, elsewhere by moving the old folder aside and removing it once the new one is in
place. A failure, a full disk, SIGINT or SIGTERM leaves the complete old folder or the complete
new one, and no temporary files. A crash or SIGKILL can still leave a staging or set-aside
folder: both are named ``.<folder>.chargeplan-new.*`` / ``.chargeplan-old.*`` and carry a
marker file, and the next write of that folder restores or removes them and says so.

The folder belongs to the tool: a manifest (``.chargeplan-files``) lists what it wrote, and a
folder holding anything else is refused, never deleted. Files are created 0666 and folders
0777, less the umask, as other command-line tools' files are.
"""

from __future__ import annotations

import contextlib
import errno
import os
import secrets
import signal
import sys
from collections.abc import Callable, Iterator, Mapping
from pathlib import Path

from chargeplan.errors import InputError
from chargeplan.loading import not_a_file

__all__ = ["MANIFEST", "write_all", "write_atomic"]

#: The list of the files the tool wrote, one name a line, kept in every output folder.
MANIFEST = ".chargeplan-files"
#: In a staging folder (and, once swapped, in the new folder until the swap is finished):
#: the name of its partner folder beside the target.
STAGING_MARK = ".chargeplan-staging"
#: In a folder set aside (the old one, on platforms without an exchanging rename).
ASIDE_MARK = ".chargeplan-aside"
_NEW, _OLD = "chargeplan-new", "chargeplan-old"
_FILE_MODE, _FOLDER_MODE = 0o666, 0o777  # less the umask, which the kernel applies
#: A file's contents, or a function that makes them (called while the file before is written).
Content = str | bytes | Callable[[], str | bytes]


def _create(path: Path, data: bytes) -> None:
    """A new file with ``data``, synced; created 0666 less the umask, never through a link."""
    flags = os.O_WRONLY | os.O_CREAT | os.O_EXCL | getattr(os, "O_NOFOLLOW", 0)
    fd = os.open(path, flags | getattr(os, "O_CLOEXEC", 0), _FILE_MODE)
    try:
        view = memoryview(data)
        while view:
            view = view[os.write(fd, view):]
        os.fsync(fd)
    finally:
        os.close(fd)


def _temp_name(folder: Path, stem: str, suffix: str) -> Path:
    return folder / f".{stem}.{secrets.token_hex(6)}{suffix}"


def _sync_folder(folder: Path) -> None:
    """Make a folder's entries (a rename, a new file) durable."""
    flags = os.O_RDONLY | getattr(os, "O_DIRECTORY", 0)
    try:
        fd = os.open(folder, flags)
    except OSError:
        return  # platforms that cannot open a folder keep their own order
    try:
        with contextlib.suppress(OSError):  # some file systems refuse fsync on a folder
            os.fsync(fd)
    finally:
        os.close(fd)


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
    with contextlib.suppress(FileNotFoundError):
        kind = not_a_file(os.lstat(target).st_mode)
        if kind:  # renaming over it would replace a device or a FIFO with a plain file
            raise InputError(f"is {kind}, not a file; chargeplan replaces only files",
                             file=shown, fix="give the name of a file to write")
    folder = target.parent if str(target.parent) else Path(".")
    if not folder.is_dir():
        raise InputError("its folder does not exist", file=shown, fix="create the folder first")
    payload = data.encode("utf-8") if isinstance(data, str) else data
    temp = _temp_name(folder, target.name, ".tmp")
    try:
        with _signals_as_exceptions():
            try:
                _create(temp, payload)
                with _signals_deferred():
                    os.replace(temp, target)
            except BaseException:
                with _signals_deferred(), contextlib.suppress(OSError):
                    os.unlink(temp)
                raise
        _sync_folder(folder)
    except OSError as error:
        raise InputError(f"cannot write it ({error.strerror})", file=shown,
                         fix="check the disk and the folder's permissions") from None
    return target


class Terminated(SystemExit):
    """SIGTERM arrived during a write: the write was undone, and the process ends (143)."""


class _Signals:
    """SIGINT and SIGTERM while writing: raised as exceptions (so the cleanup runs), or held
    back while a swap and its cleanup run, and raised once they are done."""

    holding = 0
    pending: int | None = None

    @classmethod
    def handle(cls, signum: int, frame: object) -> None:
        if cls.holding:
            cls.pending = signum
            return
        cls.raise_for(signum)

    @staticmethod
    def raise_for(signum: int) -> None:
        if signum == signal.SIGINT:
            raise KeyboardInterrupt
        raise Terminated(128 + signum)


@contextlib.contextmanager
def _signals_as_exceptions() -> Iterator[None]:
    """While writing, SIGTERM raises :class:`Terminated` and SIGINT KeyboardInterrupt, so the
    cleanup runs; a signal the process ignores stays ignored; the handlers are put back."""
    previous = {}
    try:
        for signum in (signal.SIGINT, signal.SIGTERM):
            if signal.getsignal(signum) is not signal.SIG_IGN:
                previous[signum] = signal.signal(signum, _Signals.handle)
    except ValueError:  # not the main thread: signals go to the main thread's handlers
        pass
    try:
        yield
    finally:
        for signum, handler in previous.items():
            signal.signal(signum, handler)


@contextlib.contextmanager
def _signals_deferred() -> Iterator[None]:
    """SIGINT and SIGTERM wait until the steps inside are done: a swap and its cleanup are
    short, and must not be cut in half."""
    _Signals.holding += 1
    try:
        yield
    finally:
        _Signals.holding -= 1
        if not _Signals.holding and _Signals.pending is not None:
            signum, _Signals.pending = _Signals.pending, None
            _Signals.raise_for(signum)


def _say(line: str) -> None:
    print(f"note: {line}", file=sys.stderr)


def write_all(folder: str | Path, files: Mapping[str, Content], *, force: bool = False,
              say: Callable[[str], None] = _say) -> Path:
    """Write ``files`` (name: contents, or a function that makes them) as the whole of
    ``folder``, replacing a folder this tool wrote before only with ``force``. ``say`` gets a
    line for each leftover of an interrupted earlier write that is restored or removed.

    A maker is called once, in order, while the file before it is being written; if one
    raises, nothing of the new folder is left and the old one stands.

    The bench and storage planners write their output folders through this function only.
    """
    out = Path(folder)
    shown = str(out)
    _check_names(out, files)
    if out.is_symlink() or (out.exists() and not out.is_dir()):
        raise InputError("is not a folder", file=shown, fix="give a folder to write into")
    parent = out.parent if str(out.parent) else Path(".")
    try:
        os.makedirs(parent, _FOLDER_MODE, exist_ok=True)  # as before: missing parents are made
    except (FileExistsError, NotADirectoryError):
        raise InputError("a part of its path is a file, not a folder", file=shown,
                         fix="give a folder path") from None
    except OSError as error:
        raise InputError(f"cannot create its folder ({error.strerror})", file=shown,
                         fix="check the path and its permissions") from None
    try:
        for line in _recover(out):
            say(line)
        existing = _owned_entries(out, files) if out.exists() else None
        if existing and not force:
            raise InputError("already exists", file=str(out / existing[0]),
                             fix="add --force to replace the folder's files")
        with _signals_as_exceptions():
            staging = _stage(out, files)
            _swap_in(staging, out)
        _sync_folder(parent)
    except OSError as error:
        raise InputError(f"cannot write it ({error.strerror})", file=shown,
                         fix="check the disk and the folder's permissions") from None
    return out


def _check_names(out: Path, files: Mapping[str, Content]) -> None:
    for name in files:
        if not name or "/" in name or os.sep in name or name in (".", "..") or \
                name.startswith(".chargeplan-"):
            raise InputError(f"'{name[:80]}' is not a file name chargeplan writes", file=str(out),
                             fix="report this with the input that caused it")


def _owned_entries(out: Path, files: Mapping[str, Content]) -> list[str]:
    """The folder's entries (all written by this tool), or an InputError naming one that
    was not: the manifest lists what the tool wrote, and a folder from before the manifest
    may hold only the names this write would write."""
    names = sorted(os.listdir(out))
    owned = set(files)
    if MANIFEST in names:
        from chargeplan.loading import read_input

        try:  # a regular file of the tool's making (a FIFO of that name is refused, not read)
            listed = read_input(out / MANIFEST, what="output folder's list", limit=1 << 20)
            owned |= set(listed.decode("utf-8").splitlines())
        except (InputError, UnicodeDecodeError):
            raise InputError("was not written by chargeplan", file=str(out / MANIFEST),
                             fix="give a new or empty folder") from None
    for name in names:
        entry = out / name
        if name == MANIFEST:
            continue
        if name not in owned or entry.is_symlink() or not entry.is_file():
            why = ("is a symbolic link; chargeplan does not write through links"
                   if entry.is_symlink() else "was not written by chargeplan")
            raise InputError(why, file=str(entry),
                             fix="give a new or empty folder, or move your own files out; "
                                 "chargeplan replaces only folders it wrote")
    return [n for n in names if n != MANIFEST]


def _stage(out: Path, files: Mapping[str, Content]) -> Path:
    """A complete, synced copy of the new folder beside ``out``, marked as staging; removed
    again on any failure or interruption."""
    parent = out.parent if str(out.parent) else Path(".")
    while True:
        staging = _temp_name(parent, out.name, f".{_NEW}")
        try:
            os.mkdir(staging, _FOLDER_MODE)
            break
        except FileExistsError:
            continue
    try:
        _create(staging / STAGING_MARK, staging.name.encode())
        _create_each(staging, files)
        _create(staging / MANIFEST, "".join(f"{name}\n" for name in files).encode("utf-8"))
        _sync_folder(staging)
    except BaseException:
        with _signals_deferred():
            _remove_marked(staging, STAGING_MARK)
        raise
    return staging


def _create_each(staging: Path, files: Mapping[str, Content]) -> None:
    """Each file made (a maker is called here, in the calling thread) and handed to one
    writer thread, so that writing a file (the kernel's work, outside the interpreter's
    lock) overlaps making the next.

    Every write has ended before this returns or raises. A failed write stops the writes
    after it, and its error is raised; a maker's error or a signal stops the writes not yet
    begun, waits for the one under way (signals held back meanwhile), and is raised."""
    from concurrent.futures import Future, ThreadPoolExecutor

    stopped: list[bool] = []

    def write(path: Path, data: bytes) -> None:
        if stopped:  # a write before failed, or the making did: the folder is abandoned
            return
        try:
            _create(path, data)
        except BaseException:
            stopped.append(True)
            raise

    writer = ThreadPoolExecutor(max_workers=1, thread_name_prefix="chargeplan-write")
    pending: list[Future[None]] = []
    try:
        for name, content in files.items():
            data = content() if callable(content) else content
            pending.append(writer.submit(write, staging / name,
                                         data.encode("utf-8") if isinstance(data, str) else data))
            if pending[0].done():  # a failed write (a full disk) stops the making early
                pending.pop(0).result()
        for done in pending:
            done.result()
    except BaseException:
        stopped.append(True)
        with _signals_deferred():
            writer.shutdown(wait=True, cancel_futures=True)
        raise
    writer.shutdown(wait=True)


def _exchange(first: Path, second: Path) -> bool:
    """Swap two paths in one step with Linux's ``renameat2(RENAME_EXCHANGE)``; False where
    the platform, the C library or the file system does not have it."""
    if not sys.platform.startswith("linux"):
        return False
    import ctypes

    try:
        call = ctypes.CDLL(None, use_errno=True).renameat2
    except (AttributeError, OSError):
        return False
    call.argtypes = [ctypes.c_int, ctypes.c_char_p, ctypes.c_int, ctypes.c_char_p,
                     ctypes.c_uint]
    call.restype = ctypes.c_int
    at_fdcwd, rename_exchange = -100, 2
    if call(at_fdcwd, os.fsencode(first), at_fdcwd, os.fsencode(second), rename_exchange) == 0:
        return True
    code = ctypes.get_errno()
    if code in (errno.ENOSYS, errno.EINVAL, getattr(errno, "ENOTSUP", errno.EINVAL)):
        return False
    raise OSError(code, os.strerror(code), str(first))


def _swap_in(staging: Path, out: Path) -> None:
    """Put the staged folder in ``out``'s place, then remove the old one; signals wait until
    this is done. On a failure before the swap the staging folder is removed."""
    with _signals_deferred():
        swapped = False
        try:
            if not out.exists():
                os.rename(staging, out)
                swapped = True
                _finish(out, None)
            elif _exchange(staging, out):
                swapped = True
                _finish(out, staging)  # the staging name now holds the old folder
            else:
                _swap_aside(staging, out)
                swapped = True
        except BaseException:
            if not swapped:
                _remove_marked(staging, STAGING_MARK)
            raise


def _finish(out: Path, old: Path | None) -> None:
    """After the swap: the marker moves into the old folder (so a crash leaves it marked),
    the old folder is removed, and the new one is left clean."""
    if old is not None:
        os.rename(out / STAGING_MARK, old / STAGING_MARK)
        _sync_folder(out)
        _remove_marked(old, STAGING_MARK)
    else:
        os.unlink(out / STAGING_MARK)
        _sync_folder(out)


def _swap_aside(staging: Path, out: Path) -> None:
    """Without an exchanging rename: mark the old folder and move it aside, move the new one
    in, then remove the old one. Interrupted before the new one is in, the old comes back."""
    parent = out.parent if str(out.parent) else Path(".")
    aside = _temp_name(parent, out.name, f".{_OLD}")
    _create(out / ASIDE_MARK, aside.name.encode())
    moved = False
    try:
        os.rename(out, aside)
        moved = True
        os.rename(staging, out)
    except BaseException:
        if moved and not out.exists():
            os.rename(aside, out)
        with contextlib.suppress(OSError):
            os.unlink(out / ASIDE_MARK)
        raise
    os.unlink(out / STAGING_MARK)
    _sync_folder(out)
    _remove_marked(aside, ASIDE_MARK)


def _remove_marked(folder: Path, mark: str) -> None:
    """Remove a folder of this tool's making: its files, the marker last, then the folder."""
    with contextlib.suppress(FileNotFoundError):
        for name in os.listdir(folder):
            if name != mark:
                os.unlink(folder / name)
        with contextlib.suppress(FileNotFoundError):
            os.unlink(folder / mark)
        os.rmdir(folder)


def _leftovers(out: Path) -> list[Path]:
    parent = out.parent if str(out.parent) else Path(".")
    prefix = f".{out.name}."
    try:
        names = os.listdir(parent)
    except OSError:
        return []
    return [parent / n for n in sorted(names) if n.startswith(prefix)
            and n.endswith((f".{_NEW}", f".{_OLD}")) and (parent / n).is_dir()
            and not (parent / n).is_symlink()]


def _recover(out: Path) -> list[str]:
    """Restore or remove what an interrupted earlier write of ``out`` left (only folders
    with this tool's name and marker, or the partner its marker names); a line for each."""
    notes: list[str] = []
    parent = out.parent if str(out.parent) else Path(".")
    if out.is_dir() and not out.is_symlink():
        for mark in (STAGING_MARK, ASIDE_MARK):
            if not (out / mark).is_file():
                continue
            # the write stopped just after its swap (staging) or just before (aside): the
            # folder is complete; a staging marker names the folder that holds the old files
            partner = (out / mark).read_bytes().decode("utf-8", "replace").strip()
            os.unlink(out / mark)
            notes.append(f"{out}: finished an interrupted write (its files are complete)")
            old = parent / partner
            if mark == STAGING_MARK and partner.startswith(f".{out.name}.") and \
                    partner.endswith(f".{_NEW}") and old.is_dir() and not old.is_symlink():
                _remove_marked(old, STAGING_MARK)
                notes.append(f"{out}: removed {partner}, left by an interrupted write")
    for leftover in _leftovers(out):
        marks = [m for m in (STAGING_MARK, ASIDE_MARK) if (leftover / m).is_file()]
        if not marks and os.listdir(leftover):
            continue  # not of this tool's making: left alone
        if ASIDE_MARK in marks and not out.exists():
            os.rename(leftover, out)
            os.unlink(out / ASIDE_MARK)
            notes.append(f"{out}: restored the folder an interrupted write had set aside")
            continue
        _remove_marked(leftover, marks[0] if marks else STAGING_MARK)
        notes.append(f"{out}: removed {leftover.name}, left by an interrupted write")
    return notes
