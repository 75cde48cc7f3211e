"""Writing a user's file so that it is never lost or left half-written: one way for all.

:func:`atomic_path` hands out a temporary path in the target's folder; only when the block
that fills it ends without an error is the file flushed to disk and moved over the target
in one step (:func:`os.replace`), the previous version first kept as ``<name>.bak`` when
asked.  On any failure (a full disk, an interrupt) the temporary file is removed and the
target is exactly as it was.  :func:`write_atomic` does this for a text or bytes value.
A writer killed outright (SIGKILL, a power cut) cannot remove its temporary file; the
next write of the same file does (temporary names carry the writer's process id, so the
file of a writer still running is never touched).
Scenario saving, exports, evaluation output and the app's saves all go through here.
"""
from __future__ import annotations

import os
import re
import tempfile
from contextlib import contextmanager
from pathlib import Path
from typing import Iterator

from ..errors import DualityError


def _folder(target: Path) -> Path:
    folder = target.parent if str(target.parent) else Path(".")
    if not folder.is_dir():
        raise DualityError(f"cannot write {target}: folder {folder} does not exist")
    return folder


def _write_and_sync(fd: int, data: bytes) -> None:
    """Write all of ``data`` to the open descriptor and flush it to disk."""
    view = memoryview(data)
    while view:
        n = os.write(fd, view)
        view = view[n:]
    os.fsync(fd)


def _sync_file(path: str) -> None:
    fd = os.open(path, os.O_RDONLY)
    try:
        os.fsync(fd)
    finally:
        os.close(fd)


def _sync_dir(folder: Path) -> None:
    """Flush the folder entry (the rename) to disk where the system allows it."""
    try:
        fd = os.open(folder, os.O_RDONLY)
    except OSError:  # pragma: no cover - e.g. Windows
        return
    try:
        os.fsync(fd)
    except OSError:  # pragma: no cover
        pass
    finally:
        os.close(fd)


def _remove(path: str) -> None:
    try:
        os.unlink(path)
    except OSError:
        pass


def _prefix(name: str) -> str:
    """Temporary files of ``name`` carry the writing process's id: ``.<name>.<pid>.``"""
    return f".{name}.{os.getpid()}."


def _remove_orphans(folder: Path, name: str) -> None:
    """Remove temporary files of ``name`` left by a writer that was killed outright
    (SIGKILL, a power cut): those whose process no longer runs.  A live writer's file,
    another process's included, is left alone."""
    pattern = re.compile(rf"\.{re.escape(name)}(?:\.bak)?\.(\d+)\.[^/]*\.tmp\Z")
    try:
        entries = list(os.scandir(folder))
    except OSError:
        return
    for entry in entries:
        m = pattern.match(entry.name)
        if m is None or entry.is_symlink() or not entry.is_file():
            continue
        pid = int(m.group(1))
        if pid == os.getpid() or _running(pid):
            continue
        _remove(entry.path)


def _running(pid: int) -> bool:
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except (PermissionError, OverflowError, OSError):
        return True     # someone else's process, or unknowable: keep its file
    return True


def _new_file_mode() -> int:
    """rw for whom the process's umask allows (what ``open(path, "w")`` would give)."""
    mask = os.umask(0)
    os.umask(mask)
    return 0o666 & ~mask


def _set_mode(tmp: str, target: Path) -> None:
    """The temporary file (0600 from mkstemp) gets the mode the written file should have:
    the previous file's mode when it is replaced, else the umask's (common practice of
    atomic writers, no source)."""
    try:
        mode = (target.stat().st_mode & 0o7777) if target.exists() else _new_file_mode()
        os.chmod(tmp, mode)
    except OSError:
        pass                               # a file system without modes keeps its own


def _copy_synced(src: Path, dst: Path) -> None:
    """Copy ``src`` to ``dst`` atomically too (a half-written backup is never left)."""
    data = src.read_bytes()
    fd, tmp = tempfile.mkstemp(prefix=_prefix(dst.name), suffix=".tmp", dir=dst.parent)
    try:
        try:
            _write_and_sync(fd, data)
        finally:
            os.close(fd)
        os.replace(tmp, dst)
    except BaseException:
        _remove(tmp)
        raise


@contextmanager
def atomic_path(path: str | os.PathLike, *, backup: bool = False,
                what: str = "write") -> Iterator[Path]:
    """A temporary path to fill; it replaces ``path`` when the block ends without error.

    Parameters
    ----------
    path : path-like
        The file to write.  Its folder must exist.
    backup : bool
        Keep the previous version of ``path`` (if any) as ``<name>.bak``.
    what : str
        The verb of the error message (``"save"`` for scenario files).

    Raises
    ------
    DualityError
        The folder does not exist, or the file system refused the write or the rename
        (``"<path>: could not <what> (<reason>); the previous file is unchanged"``).
        Errors raised inside the block pass through unchanged; in every case the
        temporary file is removed and ``path`` is left as it was.
    """
    target = Path(path)
    folder = _folder(target)
    try:
        _remove_orphans(folder, target.name)
        fd, tmp = tempfile.mkstemp(prefix=_prefix(target.name), suffix=".tmp", dir=folder)
    except OSError as exc:
        raise DualityError(f"{target}: cannot write in {folder} ({exc.strerror or exc})") \
            from None
    os.close(fd)
    inside = True
    try:
        _set_mode(tmp, target)
        yield Path(tmp)
        inside = False
        _sync_file(tmp)
        if backup and target.exists():
            _copy_synced(target, target.with_name(target.name + ".bak"))
        os.replace(tmp, target)
    except BaseException as exc:
        _remove(tmp)
        if isinstance(exc, OSError) and not inside:
            raise DualityError(f"{target}: could not {what} ({exc.strerror or exc}); the "
                               "previous file is unchanged") from exc
        raise
    _sync_dir(folder)


def write_atomic(path: str | os.PathLike, data: str | bytes, *, backup: bool = False,
                 what: str = "write") -> Path:
    """Write ``data`` (text as UTF-8 with ``\\n`` line ends, or bytes) to ``path``
    atomically, as :func:`atomic_path` does; returns the path.

    Raises
    ------
    DualityError
        As :func:`atomic_path`; a failed write (e.g. a full disk) counts as the file system
        refusing it.
    """
    raw = data.encode("utf-8") if isinstance(data, str) else bytes(data)
    target = Path(path)
    with atomic_path(target, backup=backup, what=what) as tmp:
        try:
            fd = os.open(tmp, os.O_WRONLY | os.O_TRUNC)
            try:
                _write_and_sync(fd, raw)
            finally:
                os.close(fd)
        except OSError as exc:
            raise DualityError(f"{target}: could not {what} ({exc.strerror or exc}); the "
                               "previous file is unchanged") from exc
    return target


__all__ = ["atomic_path", "write_atomic"]
