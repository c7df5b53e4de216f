"""Writing output files atomically, and opening folders through handles (the shared base
layer, below every other: scans and exports both write through it).

Every file phaselab writes goes through :func:`atomic_path`: the writer fills a temporary
file in the destination folder, and only a complete file is renamed onto the final name
(``os.replace``, atomic within a folder). A writer that fails or is killed midway leaves the
previous file untouched; a failure also removes the temporary file.

Temporary names are ``.<name>.<pid>-<8 hex>.tmp`` (``.partial`` for a folder being written,
such as a Zarr store), naming the process that writes them. A writer killed outright
(SIGKILL, a power cut) cannot remove its own; the next save into the same folder removes
every temporary of this pattern whose process is gone and that is older than
:data:`STALE_SECONDS` (:func:`remove_stale`).

The folder is opened once, as a handle, before the temporary file is made; the temporary
file is created and renamed relative to that handle, and writers that need a path get one
that goes through the handle (``/proc/self/fd/<handle>/<name>`` where the system offers it).
So renaming or replacing the folder by a symbolic link while a file is written cannot send
the write anywhere else.
"""

from __future__ import annotations

import os
import re
import secrets
import shutil
import stat
import time
from contextlib import contextmanager
from pathlib import Path

from phaselab.errors import ParameterError

#: a temporary file or folder of a killed writer is removed once it is this old (seconds)
#: and its process is gone
STALE_SECONDS = 60.0
_TEMPORARY = re.compile(r"^\..+\.(\d+)-[0-9a-f]{8}\.(tmp|partial)$")

# os.replace takes the same dir_fd arguments as os.rename, but only rename is listed
_DIR_FD = os.open in os.supports_dir_fd and os.rename in os.supports_dir_fd
_O_DIRECTORY = getattr(os, "O_DIRECTORY", 0)
_O_NOFOLLOW = getattr(os, "O_NOFOLLOW", 0)
_O_CLOEXEC = getattr(os, "O_CLOEXEC", 0)


def _reason(exc: OSError) -> str:
    return exc.strerror or str(exc) or type(exc).__name__


def checked_path(path) -> Path:
    """``path`` as a Path, refused when it is not a path or holds a NUL character (which no
    file name can).

    Raises
    ------
    ParameterError
    """
    if not isinstance(path, (str, os.PathLike)):
        raise ParameterError(f"a file path must be text or a path, got {type(path).__name__}")
    text = os.fspath(path)
    if isinstance(text, bytes) or "\0" in text:
        raise ParameterError(f"cannot use the file name {text!r}: it must be text without NUL characters")
    return Path(text)


def write_error(path, exc: OSError) -> ParameterError:
    """The one message for an output that cannot be written: ``cannot write <path>: <why>``."""
    return ParameterError(f"cannot write {path}: {_reason(exc)}")


def temporary_name(path: Path, kind: str) -> str:
    """``.<name>.<pid>-<8 hex>.<kind>``: a temporary beside ``path`` owned by this process."""
    return f".{path.name}.{os.getpid()}-{secrets.token_hex(4)}.{kind}"


def process_gone(pid: int) -> bool:
    """True when no process ``pid`` runs on this machine (one of another user counts as
    running)."""
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return True
    except PermissionError:
        return False
    except (OverflowError, ValueError):  # not a process number at all
        return True
    return False


def remove_stale(folder, pattern=_TEMPORARY, max_age: float = STALE_SECONDS) -> int:
    """Remove the files a killed process left in ``folder``: names matching ``pattern`` (by
    default that of :func:`temporary_name`; its first group that matched is the owner's
    process number) whose process is gone and that are older than ``max_age`` seconds.

    ``folder`` is an open folder handle (see :func:`open_folder`) or a path. Returns how many
    were removed; never raises."""
    removed = 0
    try:
        names = os.listdir(folder)
    except OSError:
        return 0
    by_handle = isinstance(folder, int)
    now = time.time()
    for name in names:
        match = pattern.match(name)
        if match is None:
            continue
        pid = int(next(g for g in match.groups() if g is not None))
        if pid == os.getpid():
            continue
        where = dict(dir_fd=folder) if by_handle else {}
        target = name if by_handle else os.path.join(folder, name)
        try:
            info = os.stat(target, follow_symlinks=False, **where)
            if now - info.st_mtime < max_age or not process_gone(pid):
                continue
            if stat.S_ISDIR(info.st_mode):
                shutil.rmtree(target, **where)
            else:
                os.unlink(target, **where)
            removed += 1
        except OSError:
            continue
    return removed


def folder_path(fd: int, fallback) -> Path:
    """A path that names the open folder ``fd`` itself, whatever happens to the path it was
    opened by: ``/proc/self/fd/<fd>`` on Linux, else ``fallback`` (the folder's own path)."""
    through = Path(f"/proc/self/fd/{fd}")
    return through if through.is_dir() else Path(fallback)


def open_folder(path) -> int:
    """Open the folder ``path`` as a handle (``os.open`` with ``O_DIRECTORY``).

    Raises
    ------
    ParameterError
        When it does not exist, is not a folder, or cannot be opened.
    """
    path = checked_path(path)
    try:
        return os.open(path, os.O_RDONLY | _O_DIRECTORY | _O_CLOEXEC)
    except FileNotFoundError:
        raise ParameterError(f"cannot write into {path}: the folder does not exist") from None
    except NotADirectoryError:
        raise ParameterError(f"cannot write into {path}: not a folder") from None
    except OSError as exc:
        raise ParameterError(f"cannot write into {path}: {_reason(exc)}") from None


@contextmanager
def atomic_path(path):
    """Give a temporary path beside ``path``; rename it onto ``path`` when the block succeeds.

    Use::

        with atomic_path(target) as tmp:
            write_everything_to(tmp)

    Parameters
    ----------
    path : str or pathlib.Path
        The final file. Its folder must exist.

    Yields
    ------
    pathlib.Path
        A new, empty file in the same folder (a hidden name ending in ``.tmp``) for the
        writer to overwrite.

    Raises
    ------
    ParameterError
        When the folder is missing or not writable, or writing or renaming fails (the
        message names the file and the reason); the temporary file is removed and the
        previous file at ``path`` is left as it was. Errors of the writer itself propagate
        unchanged, after the same clean-up.
    """
    path = checked_path(path)
    folder = path.parent
    name = temporary_name(path, "tmp")
    if not _DIR_FD:  # pragma: no cover - systems without dir_fd support (Windows)
        yield from _atomic_by_path(path, folder / name)
        return
    dfd = open_folder(folder)
    try:
        remove_stale(dfd)
        try:
            fd = os.open(name, os.O_WRONLY | os.O_CREAT | os.O_EXCL | _O_NOFOLLOW | _O_CLOEXEC, 0o666,
                         dir_fd=dfd)
            os.close(fd)
        except OSError as exc:
            raise write_error(path, exc) from None
        try:
            yield folder_path(dfd, folder) / name
            os.replace(name, path.name, src_dir_fd=dfd, dst_dir_fd=dfd)
        except OSError as exc:
            _remove(name, dfd)
            raise write_error(path, exc) from None
        except BaseException:
            _remove(name, dfd)
            raise
    finally:
        os.close(dfd)


def _remove(name: str, dfd: int) -> None:
    try:
        os.unlink(name, dir_fd=dfd)
    except OSError:
        pass


def _atomic_by_path(path: Path, tmp: Path):  # pragma: no cover - used without dir_fd support
    if not path.parent.is_dir():
        raise ParameterError(f"cannot write into {path.parent}: the folder does not exist")
    try:
        dfd = os.open(path.parent, os.O_RDONLY)
    except OSError:
        dfd = None
    if dfd is not None:
        try:
            remove_stale(dfd)
        finally:
            os.close(dfd)
    try:
        tmp.touch(exist_ok=False)
    except OSError as exc:
        raise ParameterError(f"cannot write {path}: {_reason(exc)}") from None
    try:
        yield tmp
        os.replace(tmp, path)
    except OSError as exc:
        tmp.unlink(missing_ok=True)
        raise ParameterError(f"cannot write {path}: {_reason(exc)}") from None
    except BaseException:
        tmp.unlink(missing_ok=True)
        raise
