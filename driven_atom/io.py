"""The one way this package writes a file, and the one way it asks whether a file is complete.

Every writer (results, checkpoints, campaign plans, summaries, the basis cache, figures) goes
through :func:`atomic_write`:

1. a temporary file is created **new** in the target's own folder (``O_CREAT | O_EXCL |
   O_NOFOLLOW``, a random name ending in ``.tmp``), so a symlink planted in the folder is never
   followed and two writers never share a temporary file;
2. the caller fills it (by path: h5py, xarray and matplotlib open files by name);
3. it is flushed to the disk (``fsync``) and renamed onto the target (``os.replace``, atomic on
   POSIX), and the folder entry is synced;
4. on any failure the temporary file is removed and the target is left as it was.

A full disk or a read-only folder becomes :class:`StorageError`: one line naming the path and
the free space (the command line prints it and exits 1).

Readers trust an HDF5 file only through :func:`is_complete`: the attribute ``complete`` is true
and a ``sha256`` checksum is present (a file without its checksum is incomplete, whatever else it
says).

>>> import tempfile, pathlib
>>> with tempfile.TemporaryDirectory() as d:
...     p = write_text(pathlib.Path(d) / "a.txt", "hello")
...     p.read_text(), sorted(x.name for x in pathlib.Path(d).iterdir())
('hello', ['a.txt'])
"""
from __future__ import annotations

import errno
import os
import secrets
import shutil
from contextlib import contextmanager
from pathlib import Path

from driven_atom.errors import InputError, short

TMP_SUFFIX = ".tmp"
_NO_SPACE = {errno.ENOSPC, errno.EDQUOT, errno.EFBIG}
_READ_ONLY = {errno.EROFS, errno.EACCES, errno.EPERM}


class StorageError(OSError):
    """A file could not be written: disk full, quota, read-only folder. One line, names the path."""


def free_space(path) -> str:
    """Free space of the file system holding ``path`` (or its nearest existing parent), readable.

    >>> free_space("/").endswith("B free")
    True
    """
    p = Path(path).absolute()
    while not p.exists() and p != p.parent:
        p = p.parent
    try:
        free = shutil.disk_usage(p).free
    except OSError:
        return "free space unknown"
    for unit in ("B", "KiB", "MiB", "GiB", "TiB"):
        if free < 1024 or unit == "TiB":
            return f"{free:.3g} {unit} free" if unit != "B" else f"{free} B free"
        free /= 1024
    return "free space unknown"   # pragma: no cover


def storage_error(path, exc: OSError) -> StorageError:
    """A :class:`StorageError` with one line for ``exc`` raised while writing ``path``."""
    if exc.errno in _NO_SPACE or "No space left" in str(exc):
        why = "the disk is full" if exc.errno == errno.ENOSPC else "the quota or file size limit is reached"
    elif exc.errno in _READ_ONLY:
        why = "the folder is read-only or not writable"
    else:
        why = exc.strerror or str(exc)
    err = StorageError(exc.errno, f"cannot write {str(path)!r}: {why} ({free_space(path)}); "
                                  f"earlier files are intact")
    err.filename = str(path)
    return err


def temp_path(path) -> Path:
    """A new, empty temporary file beside ``path``, created exclusively (never through a symlink)."""
    path = Path(path)
    for _ in range(100):
        tmp = path.with_name(f".{path.name}.{os.getpid()}-{secrets.token_hex(4)}{TMP_SUFFIX}")
        try:
            fd = os.open(tmp, os.O_WRONLY | os.O_CREAT | os.O_EXCL | getattr(os, "O_NOFOLLOW", 0), 0o644)
        except FileExistsError:
            continue
        os.close(fd)
        return tmp
    raise FileExistsError(errno.EEXIST, f"no free temporary name beside {str(path)!r}")  # pragma: no cover


def _fsync_file(path: Path) -> None:
    fd = os.open(path, os.O_RDONLY)
    try:
        os.fsync(fd)
    finally:
        os.close(fd)


def _fsync_dir(folder: Path) -> None:
    try:
        fd = os.open(folder, os.O_RDONLY)
    except OSError:
        return
    try:
        os.fsync(fd)
    except OSError:
        pass
    finally:
        os.close(fd)


def _is_full(exc: OSError) -> bool:
    """A write failed for lack of room (errno, or the text of libraries that lose the errno)."""
    return exc.errno in _NO_SPACE or "No space left" in str(exc) or "Disk quota" in str(exc)


@contextmanager
def atomic_write(path, *, sync: bool = True, size_hint: float | None = None):
    """Context manager yielding a temporary path to fill; on success it replaces ``path``.

    ``sync``: fsync the file and its folder (turn off only for throw-away markers).
    ``size_hint``: bytes the file will take; a disk without that room (and 1 MiB) is refused
    before anything is written (some writers crash rather than fail on a full disk).

    >>> import tempfile, pathlib
    >>> with tempfile.TemporaryDirectory() as d:
    ...     target = pathlib.Path(d) / "x.bin"
    ...     with atomic_write(target) as tmp:
    ...         _ = tmp.write_bytes(b"1")
    ...     target.read_bytes()
    b'1'
    """
    path = Path(path)
    try:
        path.parent.mkdir(parents=True, exist_ok=True)
        if size_hint is not None and shutil.disk_usage(path.parent).free < 1.1 * size_hint + (1 << 20):
            raise OSError(errno.ENOSPC, "No space left on device")
        tmp = temp_path(path)
    except OSError as exc:
        if exc.errno in _READ_ONLY or _is_full(exc):
            raise storage_error(path, exc) from None
        raise
    try:
        yield tmp
        if sync:
            _fsync_file(tmp)
        os.replace(tmp, path)
        if sync:
            _fsync_dir(path.parent)
    except OSError as exc:
        tmp.unlink(missing_ok=True)
        if isinstance(exc, StorageError):
            raise
        if exc.errno in _READ_ONLY or _is_full(exc):
            raise storage_error(path, exc) from None
        raise
    except BaseException:
        tmp.unlink(missing_ok=True)
        raise


def write_text(path, text: str, *, sync: bool = True) -> Path:
    """Write ``text`` (UTF-8) to ``path`` atomically."""
    with atomic_write(path, sync=sync) as tmp:
        with open(tmp, "w", encoding="utf-8") as fh:
            fh.write(text)
    return Path(path)


def is_complete(path) -> bool:
    """True only for a readable HDF5 file marked ``complete`` and carrying its ``sha256``."""
    import h5py

    try:
        with h5py.File(path, "r") as f:
            return bool(f.attrs.get("complete", False)) and "sha256" in f.attrs
    except (OSError, ValueError, KeyError):
        return False


def read_regular_text(path, *, what: str = "file", max_bytes: int = 10_000_000) -> str:
    """The UTF-8 text of a regular file (not a FIFO, device or folder), at most ``max_bytes``;
    one-line :class:`InputError` otherwise.

    >>> read_regular_text("/dev/null")
    Traceback (most recent call last):
    ...
    driven_atom.errors.InputError: file '/dev/null' is not a regular file
    """
    import stat

    path = Path(path)
    try:
        info = os.stat(path)
    except FileNotFoundError:
        raise InputError(f"{what} {short(str(path))!r} not found") from None
    except OSError as exc:
        raise InputError(f"{what} {short(str(path))!r} cannot be read: {exc.strerror or exc}") from None
    if not stat.S_ISREG(info.st_mode):
        raise InputError(f"{what} {short(str(path))!r} is not a regular file")
    if info.st_size > max_bytes:
        raise InputError(f"{what} {short(str(path))!r} is {info.st_size} bytes; at most {max_bytes}")
    try:
        return path.read_bytes().decode("utf-8")
    except UnicodeDecodeError as exc:
        raise InputError(f"{what} {short(str(path))!r} is not UTF-8 text (byte {exc.start})") from None
    except OSError as exc:
        raise InputError(f"{what} {short(str(path))!r} cannot be read: {exc.strerror or exc}") from None
