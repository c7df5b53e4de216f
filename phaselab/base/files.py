"""Writing output files atomically, and opening folders through handles.

Every file phaselab writes goes through :func:`atomic_path`: the writer fills a temporary
file in the destination folder, and only a complete file is renamed onto the final name
(``os.replace``, atomic within a folder). A writer that fails or is killed midway leaves the
previous file untouched; a failure also removes the temporary file.

The folder is opened once, as a handle, before the temporary file is made; the temporary
file is created and renamed relative to that handle, and writers that need a path get one
that goes through the handle (``/proc/self/fd/<handle>/<name>`` where the system offers it).
So renaming or replacing the folder by a symbolic link while a file is written cannot send
the write anywhere else.
"""

from __future__ import annotations

import os
import secrets
from contextlib import contextmanager
from pathlib import Path

from phaselab.errors import PhaselabError

_DIR_FD = os.open in os.supports_dir_fd and os.replace in os.supports_dir_fd
_O_DIRECTORY = getattr(os, "O_DIRECTORY", 0)
_O_NOFOLLOW = getattr(os, "O_NOFOLLOW", 0)
_O_CLOEXEC = getattr(os, "O_CLOEXEC", 0)


def _reason(exc: OSError) -> str:
    return exc.strerror or str(exc) or type(exc).__name__


def folder_path(fd: int, fallback) -> Path:
    """A path that names the open folder ``fd`` itself, whatever happens to the path it was
    opened by: ``/proc/self/fd/<fd>`` on Linux, else ``fallback`` (the folder's own path)."""
    through = Path(f"/proc/self/fd/{fd}")
    return through if through.is_dir() else Path(fallback)


def open_folder(path) -> int:
    """Open the folder ``path`` as a handle (``os.open`` with ``O_DIRECTORY``).

    Raises
    ------
    PhaselabError
        When it does not exist, is not a folder, or cannot be opened.
    """
    path = Path(path)
    try:
        return os.open(path, os.O_RDONLY | _O_DIRECTORY | _O_CLOEXEC)
    except FileNotFoundError:
        raise PhaselabError(f"cannot write into {path}: the folder does not exist") from None
    except NotADirectoryError:
        raise PhaselabError(f"cannot write into {path}: not a folder") from None
    except OSError as exc:
        raise PhaselabError(f"cannot write into {path}: {_reason(exc)}") from None


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
    PhaselabError
        When the folder is missing or not writable, or writing or renaming fails (the
        message names the file and the reason); the temporary file is removed and the
        previous file at ``path`` is left as it was. Errors of the writer itself propagate
        unchanged, after the same clean-up.
    """
    path = Path(path)
    folder = path.parent
    name = f".{path.name}.{secrets.token_hex(6)}.tmp"
    if not _DIR_FD:  # pragma: no cover - systems without dir_fd support (Windows)
        yield from _atomic_by_path(path, folder / name)
        return
    dfd = open_folder(folder)
    try:
        try:
            fd = os.open(name, os.O_WRONLY | os.O_CREAT | os.O_EXCL | _O_NOFOLLOW | _O_CLOEXEC, 0o666,
                         dir_fd=dfd)
            os.close(fd)
        except OSError as exc:
            raise PhaselabError(f"cannot write {path}: {_reason(exc)}") from None
        try:
            yield folder_path(dfd, folder) / name
            os.replace(name, path.name, src_dir_fd=dfd, dst_dir_fd=dfd)
        except OSError as exc:
            _remove(name, dfd)
            raise PhaselabError(f"cannot write {path}: {_reason(exc)}") from None
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
        raise PhaselabError(f"cannot write into {path.parent}: the folder does not exist")
    try:
        tmp.touch(exist_ok=False)
    except OSError as exc:
        raise PhaselabError(f"cannot write {path}: {_reason(exc)}") from None
    try:
        yield tmp
        os.replace(tmp, path)
    except OSError as exc:
        tmp.unlink(missing_ok=True)
        raise PhaselabError(f"cannot write {path}: {_reason(exc)}") from None
    except BaseException:
        tmp.unlink(missing_ok=True)
        raise
