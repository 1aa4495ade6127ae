"""Atomic file writes: a crash or an error never leaves a half-written file.

The data goes to a temporary file in the destination folder, which is flushed
and synced to disk, then renamed over the destination in one step
(``os.replace``); the folder itself is synced where the platform allows it.
On any failure the temporary file is removed and the original file, if there
was one, is left exactly as it was.
"""

from __future__ import annotations

import contextlib
import errno
import os
import secrets
from pathlib import Path

from ..errors import CalcbuilderError

__all__ = ["FileWriteError", "atomic_write_bytes", "atomic_write_text"]

_LINK_UNSUPPORTED = {errno.EPERM, errno.EXDEV, errno.ENOTSUP, errno.EOPNOTSUPP, errno.EMLINK}


class FileWriteError(CalcbuilderError):
    """A file could not be written; the original (if any) is unchanged."""


def atomic_write_bytes(
    path: str | os.PathLike[str],
    data: bytes,
    *,
    mode: int | None = None,
    overwrite: bool = True,
) -> Path:
    """Write ``data`` to ``path`` atomically.

    Parameters
    ----------
    path : str or path-like
        Destination file. Its folder must exist.
    data : bytes
        The complete new content.
    mode : int, optional
        Permission bits for the new file (e.g. ``0o600`` for a private key).
        The file is created with them, so it is never readable by others even
        briefly. By default a replaced file keeps its permissions and a new
        file gets ``0o666`` less the umask.
    overwrite : bool, default True
        If false, refuse when ``path`` exists (checked atomically where the
        file system supports hard links).

    Returns
    -------
    pathlib.Path
        The destination path.

    Raises
    ------
    FileWriteError
        If the file cannot be written or exists and ``overwrite`` is false;
        nothing is changed on disk.
    """
    target = Path(path)
    if not overwrite and target.exists():
        raise FileWriteError(f"{target}: already exists; refusing to overwrite it. "
                             "Choose another name or move the existing file away.")
    perms = mode if mode is not None else _existing_mode(target)
    tmp = target.with_name(f".{target.name}.{secrets.token_hex(6)}.tmp")
    try:
        _write_synced(tmp, data, 0o666 if perms is None else perms)
        if perms is not None:
            os.chmod(tmp, perms)
        _install(tmp, target, overwrite)
    except BaseException as exc:
        with contextlib.suppress(OSError):
            tmp.unlink()
        if isinstance(exc, OSError):
            raise _write_error(target, exc) from exc
        raise
    _sync_directory(target.parent)
    return target


def atomic_write_text(
    path: str | os.PathLike[str],
    text: str,
    *,
    encoding: str = "utf-8",
    mode: int | None = None,
    overwrite: bool = True,
) -> Path:
    """Write ``text`` to ``path`` atomically (see :func:`atomic_write_bytes`).

    The text is written as given: no newline translation, so files are the
    same on every platform.
    """
    return atomic_write_bytes(path, text.encode(encoding), mode=mode, overwrite=overwrite)


def _existing_mode(target: Path) -> int | None:
    """Permission bits of an existing destination, or None if there is none."""
    try:
        return target.stat().st_mode & 0o7777
    except OSError:
        return None


def _write_synced(tmp: Path, data: bytes, perms: int) -> None:
    """Create ``tmp`` exclusively with ``perms``, write ``data`` and fsync it."""
    flags = os.O_WRONLY | os.O_CREAT | os.O_EXCL | getattr(os, "O_BINARY", 0)
    fd = os.open(tmp, flags, perms)
    with open(fd, "wb", closefd=True) as handle:
        handle.write(data)
        handle.flush()
        os.fsync(handle.fileno())


def _install(tmp: Path, target: Path, overwrite: bool) -> None:
    """Move the finished temporary file into place."""
    if overwrite:
        os.replace(tmp, target)
        return
    try:
        os.link(tmp, target)  # fails if target exists: no race with another writer
    except OSError as exc:
        if exc.errno not in _LINK_UNSUPPORTED:
            raise
        if target.exists():
            raise FileExistsError(errno.EEXIST, "File exists", str(target)) from exc
        os.replace(tmp, target)
        return
    with contextlib.suppress(OSError):
        tmp.unlink()


def _sync_directory(folder: Path) -> None:
    """Flush the folder entry to disk where the platform allows it."""
    try:
        fd = os.open(folder, os.O_RDONLY)
    except OSError:
        return
    try:
        os.fsync(fd)
    except OSError:
        pass  # e.g. Windows or some network file systems: best effort
    finally:
        os.close(fd)


def _write_error(target: Path, exc: OSError) -> FileWriteError:
    """Turn an OSError into one clear message naming the destination."""
    if isinstance(exc, FileExistsError):
        return FileWriteError(f"{target}: already exists; refusing to overwrite it. "
                              "Choose another name or move the existing file away.")
    reason = exc.strerror or str(exc)
    hint = ("the folder does not exist; create it first" if isinstance(exc, FileNotFoundError)
            else "check that the folder exists, is writable and has free space")
    return FileWriteError(f"{target}: could not write the file ({reason}); {hint}. "
                          "Any existing file there is unchanged.")
