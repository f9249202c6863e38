"""Atomic file writes: a reader sees the previous file or the new one, never half a file.

Every output is first written to a temporary file in the *same folder* as its
target (so the final rename never crosses a file system), flushed and
``fsync``-ed, then moved over the target with :func:`os.replace`, which POSIX
and Windows both perform atomically within one file system. The folder is
``fsync``-ed afterwards where the platform allows it, so the rename itself
survives a power cut. On any failure the temporary file is removed and the
target is untouched.

An export writes hundreds of files into a few folders; inside
:func:`deferred_dir_sync` each folder is ``fsync``-ed once when the block
ends instead of after every rename (each sync costs milliseconds on a busy
disk). The export writes its manifest after the block, so a manifest never
lists a file whose rename could still be lost.

Temporary names start with :data:`TEMP_PREFIX` and end with the target's own
name, so libraries that infer a format from the suffix (``scipy.sparse.save_npz``
appends ``.npz`` when it is missing, matplotlib picks the format from it) see
the real extension.

Every :class:`OSError` raised while writing becomes a one-line
:class:`~workbench.core.errors.OutputError` naming the file and the fix.
"""

from __future__ import annotations

import errno
import os
import secrets
from collections.abc import Iterator
from contextlib import contextmanager
from contextvars import ContextVar
from pathlib import Path
from typing import IO, Any

from workbench.core.errors import OutputError

#: Prefix of every temporary file; a crashed run's leftovers are recognised by it.
TEMP_PREFIX = ".termloom-tmp-"


def describe_os_error(exc: OSError, path: Path) -> str:
    """One line that says what went wrong writing ``path`` and what to do about it."""
    code = exc.errno
    if code in (errno.ENOSPC, getattr(errno, "EDQUOT", errno.ENOSPC)):
        return f"the disk is full while writing {path}; free some space or choose another output folder"
    if code in (errno.EACCES, errno.EPERM):
        return f"no permission to write {path}; choose an output folder you can write to"
    if code == errno.EROFS:
        return f"{path} is on a read-only file system; choose another output folder"
    if code == errno.ENOTDIR:
        return f"a part of {path} is a file, not a folder; choose another output folder"
    if code == errno.EISDIR:
        return f"{path} is a folder where a file should be written; move it aside or choose another output folder"
    if code == errno.ENAMETOOLONG:
        return f"the path {path} is too long for this file system; choose a shorter output folder"
    reason = exc.strerror or exc.__class__.__name__
    return f"cannot write {path} ({reason}); check the output folder and try again"


def _fsync_file(path: Path) -> None:
    with open(path, "rb") as handle:
        os.fsync(handle.fileno())


def _fsync_dir(folder: Path) -> None:
    # Directory fsync makes the rename durable on POSIX; Windows cannot open a
    # folder this way, and the rename is already atomic there, so skip it.
    if os.name != "posix":
        return
    fd = os.open(folder, os.O_RDONLY)
    try:
        os.fsync(fd)
    finally:
        os.close(fd)


#: Folders waiting for their fsync inside :func:`deferred_dir_sync` (``None`` outside it).
_PENDING_DIRS: ContextVar[set[Path] | None] = ContextVar("termloom_pending_dirs", default=None)


@contextmanager
def deferred_dir_sync() -> Iterator[None]:
    """Within the block, sync each folder written into once, when the block ends without error."""
    folders: set[Path] = set()
    token = _PENDING_DIRS.set(folders)
    try:
        yield
    finally:
        _PENDING_DIRS.reset(token)
    for folder in sorted(folders):
        try:
            _fsync_dir(folder)
        except OSError as exc:
            raise OutputError(describe_os_error(exc, folder)) from None


def _sync_folder_of(target: Path) -> None:
    pending = _PENDING_DIRS.get()
    if pending is None:
        _fsync_dir(target.parent)
    else:
        pending.add(target.parent)


def temp_name(target: Path) -> Path:
    """A fresh temporary path beside ``target``, ending with ``target``'s name."""
    return target.with_name(f"{TEMP_PREFIX}{secrets.token_hex(4)}-{target.name}")


def _remove_quietly(path: Path) -> None:
    try:
        path.unlink()
    except FileNotFoundError:
        pass
    except OSError:
        # The write already failed and that error is the one the user needs;
        # a stale temp file is reported as an extra file by verify_run.
        pass


@contextmanager
def atomic_path(target: Path | str) -> Iterator[Path]:
    """Yield a temporary path to write; on success it replaces ``target`` atomically.

    Use for libraries that insist on writing to a path themselves
    (``DataFrame.to_parquet``, ``scipy.io.mmwrite``, ``Figure.savefig``...).
    If the block raises, the temporary file is removed, ``target`` is left as
    it was, and an :class:`OSError` is re-raised as :class:`OutputError`.
    """
    target = Path(target)
    tmp = temp_name(target)
    try:
        yield tmp
        if not tmp.exists():
            raise OutputError(f"nothing was written to {target}; this is a bug in termloom, please report it")
        _fsync_file(tmp)
        os.replace(tmp, target)
        _sync_folder_of(target)
    except OSError as exc:
        _remove_quietly(tmp)
        raise OutputError(describe_os_error(exc, target)) from None
    except BaseException:
        _remove_quietly(tmp)
        raise


@contextmanager
def atomic_open(target: Path | str, mode: str = "w", **kwargs: Any) -> Iterator[IO[Any]]:
    """Yield an open file (``mode`` "w" or "wb"); on success it replaces ``target`` atomically.

    Keyword arguments go to :func:`open` (``encoding``, ``newline``...).
    """
    if mode not in ("w", "wb"):
        raise ValueError(f"atomic_open writes whole files; mode must be 'w' or 'wb', not {mode!r}")
    if mode == "w":
        kwargs.setdefault("encoding", "utf-8")
    with atomic_path(target) as tmp:
        with open(tmp, mode, **kwargs) as handle:
            yield handle
            handle.flush()


def write_bytes(target: Path | str, data: bytes) -> Path:
    """Write ``data`` to ``target`` atomically; returns the target path."""
    with atomic_open(target, "wb") as handle:
        handle.write(data)
    return Path(target)


def write_text(target: Path | str, text: str, encoding: str = "utf-8") -> Path:
    """Write ``text`` to ``target`` atomically with ``\\n`` line ends kept as given."""
    with atomic_open(target, "w", encoding=encoding, newline="") as handle:
        handle.write(text)
    return Path(target)


def remove_stale_temps(folder: Path) -> list[Path]:
    """Delete temporary files a crashed earlier run left in ``folder`` and below; return them."""
    removed = []
    if not folder.is_dir():
        return removed
    for path in sorted(folder.rglob(f"{TEMP_PREFIX}*")):
        if path.is_file():
            _remove_quietly(path)
            removed.append(path)
    return removed
