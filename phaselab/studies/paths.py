"""Confining a study's output files to the output folder.

Two layers. :func:`check_relative` and :func:`confined_path` check the names a study file
gives (relative, no ``..``, plain characters, at most 4 folders deep) and that they resolve
inside the output folder. :func:`open_output_folder` then opens the folder a file goes into
by walking from the output folder one part at a time through directory handles, never
following a symbolic link, so a link swapped in after the check cannot redirect the write;
the file itself is written through that handle (:mod:`phaselab.base.atomic`).
"""

from __future__ import annotations

import errno
import os
import re
from pathlib import Path

from phaselab.studies.fields import Fields

#: one part of an output path: a letter or digit, then letters, digits, '.', '_' or '-'
_PATH_PART = re.compile(r"[A-Za-z0-9][A-Za-z0-9._-]{0,79}")
_O_DIRECTORY = getattr(os, "O_DIRECTORY", 0)
_O_NOFOLLOW = getattr(os, "O_NOFOLLOW", 0)
_O_CLOEXEC = getattr(os, "O_CLOEXEC", 0)
_BY_HANDLE = os.open in os.supports_dir_fd and os.mkdir in os.supports_dir_fd and bool(_O_NOFOLLOW)


def check_relative(f: Fields, name: str, key: str) -> None:
    """Refuse a path that is absolute, climbs out (``..``) or uses odd characters."""
    if not name:
        raise f.error(key, "is empty")
    if name.startswith(("/", "\\", "~")) or (len(name) > 1 and name[1] == ":") or "\\" in name:
        raise f.error(key, f"{name!r} must be a relative path inside the output folder "
                           "(no absolute paths, drive letters, backslashes or ~)")
    parts = name.split("/")
    if any(p == ".." for p in parts):
        raise f.error(key, f"{name!r} leaves the output folder (\"..\" is not allowed)")
    parts = [p for p in parts if p not in ("", ".")]
    if not parts or len(parts) > 4:
        raise f.error(key, f"{name!r} must name a file at most 4 folders deep")
    for p in parts:
        if not _PATH_PART.fullmatch(p):
            raise f.error(key, f"{name!r}: part {p!r} may hold only letters, digits, '.', '_' and '-' "
                               "and must start with a letter or digit")


def confined_path(base: Path, folder: str, name: str, source: str = "<study>") -> Path:
    """``base / folder / name``, checked (after resolving links) to lie inside ``base``."""
    f = Fields(source)
    if folder:
        check_relative(f, folder, "output.folder")
    check_relative(f, name, "output.file")
    root = Path(base).resolve()
    target = (root / folder / name).resolve()
    if target != root and root not in target.parents:
        raise f.error("output", f"{folder + '/' if folder else ''}{name} resolves to {target}, outside "
                                f"the output folder {root}")
    return target


def _parts(folder: str, name: str) -> list[str]:
    """The folder parts between the output folder and the file ``folder/name``."""
    parts = (folder.split("/") if folder else []) + name.split("/")[:-1]
    return [p for p in parts if p not in ("", ".")]


def open_output_folder(base, folder: str, name: str, source: str = "<study>") -> int:
    """Open the folder that receives output ``name`` (under ``folder``) as a handle.

    The walk starts at ``base`` (the output folder, made if missing) and opens each
    further part relative to the previous handle with ``O_NOFOLLOW``, making missing folders
    on the way, so the handle returned is a real folder inside ``base`` whatever links
    appear meanwhile. The caller closes it (``os.close``).

    Raises
    ------
    StudyFileError
        When a part is a symbolic link or not a folder, or a folder cannot be made.
    """
    f = Fields(source)
    check_relative(f, name, "output.file")
    if folder:
        check_relative(f, folder, "output.folder")
    base = Path(base)
    try:
        base.mkdir(parents=True, exist_ok=True)
        fd = os.open(base, os.O_RDONLY | _O_DIRECTORY | _O_CLOEXEC)
    except OSError as exc:
        raise f.error("output", f"cannot open the output folder {base}: {exc.strerror or exc}") from None
    if not _BY_HANDLE:  # pragma: no cover - systems without dir_fd support (Windows)
        os.close(fd)
        target = confined_path(base, folder, name, source).parent
        target.mkdir(parents=True, exist_ok=True)
        return os.open(target, os.O_RDONLY)
    flags = os.O_RDONLY | _O_DIRECTORY | _O_NOFOLLOW | _O_CLOEXEC
    walked = []
    try:
        for part in _parts(folder, name):
            walked.append(part)
            try:
                step = os.open(part, flags, dir_fd=fd)
            except FileNotFoundError:
                try:
                    os.mkdir(part, 0o777, dir_fd=fd)
                except FileExistsError:
                    pass
                step = os.open(part, flags, dir_fd=fd)
            os.close(fd)
            fd = step
    except OSError as exc:
        os.close(fd)
        where = "/".join(walked)
        if exc.errno in (errno.ELOOP, errno.ENOTDIR, errno.EMLINK):
            raise f.error("output", f"{where} is a symbolic link or not a folder; outputs are written only "
                                    f"into real folders inside the output folder {base}") from None
        raise f.error("output", f"cannot make folder {where} in {base}: {exc.strerror or exc}") from None
    return fd
