"""The on-disk cache of generated modules (a system's kernels, the loop modules).

A generated module is a plain Python file named by a hash of everything that went into it.
Its functions are compiled by numba with ``cache=True``, so numba stores their machine code
in ``__pycache__`` beside it and a second Python process loads them without compiling.

The cache lives in ``$PHASELAB_CACHE_DIR`` or else ``$XDG_CACHE_HOME/phaselab`` (default
``~/.cache/phaselab``), created private to the user (mode 0700): whoever can write there can
change the code phaselab runs. Nothing in it is trusted blindly:

- every generated file has its SHA-256 digest stored beside it (``<name>.sha256``); a file
  whose digest does not match (truncated, edited) is generated anew and numba's machine code
  for it is discarded;
- a module that fails to load is generated and compiled anew, once;
- a folder that cannot be written (read-only, or the path is a file) is replaced by a
  private temporary folder for this process, with a one-line warning; that folder is
  removed when the process exits.

Deleting the folder is always safe.
"""

from __future__ import annotations

import atexit
import hashlib
import importlib.util
import os
import shutil
import stat
import sys
import tempfile
import warnings
from pathlib import Path
from types import ModuleType

from phaselab.base.atomic import atomic_path

_folder: list[Path] = []
_loaded: dict[str, ModuleType] = {}


def _configured_dir() -> Path:
    root = os.environ.get("PHASELAB_CACHE_DIR")
    if root:
        return Path(root)
    base = os.environ.get("XDG_CACHE_HOME") or os.path.join(os.path.expanduser("~"), ".cache")
    return Path(base) / "phaselab"


def _usable(path: Path) -> str:
    """'' when ``path`` is (or could be made) a folder we can write, else why not."""
    try:
        path.mkdir(mode=0o700, parents=True, exist_ok=True)
    except FileExistsError:
        return "it is a file, not a folder"
    except OSError as exc:
        return exc.strerror or type(exc).__name__
    if not path.is_dir():
        return "it is not a folder"
    try:
        fd, probe = tempfile.mkstemp(dir=path, prefix=".probe-")
        os.close(fd)
        os.unlink(probe)
    except OSError as exc:
        return f"it cannot be written ({exc.strerror or type(exc).__name__})"
    return ""


def cache_dir() -> Path:
    """The folder holding generated modules (created private to the user on first use).

    When the configured folder cannot be used, a private temporary folder serves this
    process instead (compiled code is then not kept between processes) and a one-line
    :class:`RuntimeWarning` says so.
    """
    wanted = _configured_dir()
    if _folder and _folder[0][0] == wanted:
        return _folder[0][1]
    why = _usable(wanted)
    if why:
        path = Path(tempfile.mkdtemp(prefix="phaselab-cache-"))
        atexit.register(shutil.rmtree, path, True)  # nothing in it serves another process
        warnings.warn(f"phaselab: the kernel cache {wanted} is not usable ({why}); using the private "
                      f"temporary folder {path} for this process", RuntimeWarning, stacklevel=3)
    else:
        path = wanted
        _tighten(path)
    _folder[:] = [(wanted, path)]
    return path


def is_fallback() -> bool:
    """True when this process uses a private temporary folder (removed at exit) instead of
    the configured cache."""
    return bool(_folder) and _folder[0][0] != _folder[0][1]


def _tighten(path: Path) -> None:
    """Remove group and other write permission from a cache folder we own."""
    try:
        st = path.stat()
        if st.st_uid == os.getuid() and st.st_mode & (stat.S_IWGRP | stat.S_IWOTH):
            os.chmod(path, stat.S_IMODE(st.st_mode) & ~(stat.S_IWGRP | stat.S_IWOTH))
    except (OSError, AttributeError):
        pass


def source_hash(*parts: str) -> str:
    """A short stable hash of text parts (24 hex digits)."""
    h = hashlib.sha256()
    for part in parts:
        h.update(part.encode())
        h.update(b"\0")
    return h.hexdigest()[:24]


def digest(text: str) -> str:
    """The SHA-256 digest of a generated file's text."""
    return hashlib.sha256(text.encode()).hexdigest()


def codegen_fingerprint() -> str:
    """A hash of the code generator's own files and the versions it depends on, so that any
    change to how kernels are written invalidates old cache entries."""
    import numba

    from phaselab import __version__

    here = Path(__file__).parent
    texts = [p.read_text() for p in sorted(here.glob("*.py"))]
    return source_hash(*texts, __version__, numba.__version__, sys.version)


def _write_atomic(path: Path, text: str) -> None:
    with atomic_path(path) as tmp:
        tmp.write_text(text)


def discard_machine_code(folder: Path, name: str) -> None:
    """Delete numba's cached machine code of the generated module ``name``."""
    pycache = folder / "__pycache__"
    if pycache.is_dir():
        for item in pycache.glob(f"{name}.*"):
            try:
                item.unlink()
            except OSError:
                pass


def _verified(path: Path, stamp: Path) -> bool:
    try:
        return stamp.read_text().strip() == digest(path.read_text())
    except (OSError, UnicodeDecodeError):
        return False


def _import(name: str, path: Path) -> ModuleType:
    spec = importlib.util.spec_from_file_location(f"phaselab_generated_{name}", path)
    module = importlib.util.module_from_spec(spec)
    sys.modules[spec.name] = module
    try:
        spec.loader.exec_module(module)
    except BaseException:
        sys.modules.pop(spec.name, None)
        raise
    return module


def load_module(name: str, make_source) -> ModuleType:
    """Import the generated module ``<cache>/<name>.py``, writing it first if absent or not
    matching its stored digest.

    Parameters
    ----------
    name : str
        File stem; it must already encode a hash of everything the source depends on.
    make_source : callable returning str
        Called only when the file must be (re)written (symbolic work is skipped on a warm
        start).

    Returns
    -------
    module
        Imported once per process.
    """
    if name in _loaded:
        return _loaded[name]
    folder = cache_dir()
    path = folder / f"{name}.py"
    stamp = folder / f"{name}.sha256"
    fresh = False
    if not (path.exists() and _verified(path, stamp)):
        _regenerate(folder, name, path, stamp, make_source)
        fresh = True
    try:
        module = _import(name, path)
    except Exception:
        if fresh:
            raise
        # a damaged file or damaged machine code: generate and compile anew, once
        _regenerate(folder, name, path, stamp, make_source)
        module = _import(name, path)
    _loaded[name] = module
    return module


def reload_module(name: str, make_source) -> ModuleType:
    """Discard a loaded module and its machine code, then load it anew (after a failure of
    its cached machine code at call time)."""
    _loaded.pop(name, None)
    sys.modules.pop(f"phaselab_generated_{name}", None)
    folder = cache_dir()
    path = folder / f"{name}.py"
    _regenerate(folder, name, path, folder / f"{name}.sha256", make_source)
    return load_module(name, make_source)


def _regenerate(folder: Path, name: str, path: Path, stamp: Path, make_source) -> None:
    source = make_source()
    discard_machine_code(folder, name)
    _write_atomic(path, source)
    _write_atomic(stamp, digest(source) + "\n")


def clear() -> None:
    """Delete every generated module and its machine code from the cache folder."""
    folder = cache_dir()
    for item in folder.iterdir():
        if item.name == "__pycache__":
            shutil.rmtree(item, ignore_errors=True)
        elif item.suffix in (".py", ".sha256", ".json", ".tmp"):
            try:
                item.unlink()
            except OSError:
                pass
    _loaded.clear()
