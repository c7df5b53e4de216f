"""The on-disk cache of generated kernel modules.

A generated module is a plain Python file named by a hash of everything that went into it
(the system's form, the loop sources, the phaselab and numba versions). Its functions are
decorated with ``njit(cache=True)``, so numba stores their machine code beside it and a
second Python process loads them without compiling.

The cache lives in ``$PHASELAB_CACHE_DIR`` or else ``$XDG_CACHE_HOME/phaselab`` (default
``~/.cache/phaselab``). Deleting the folder is always safe.
"""

from __future__ import annotations

import hashlib
import importlib.util
import os
import sys
import tempfile
from pathlib import Path
from types import ModuleType


def cache_dir() -> Path:
    """The folder holding generated modules (created on first use)."""
    root = os.environ.get("PHASELAB_CACHE_DIR")
    if root:
        path = Path(root)
    else:
        base = os.environ.get("XDG_CACHE_HOME") or os.path.join(os.path.expanduser("~"), ".cache")
        path = Path(base) / "phaselab"
    path.mkdir(parents=True, exist_ok=True)
    return path


def source_hash(*parts: str) -> str:
    """A short stable hash of text parts."""
    h = hashlib.sha256()
    for part in parts:
        h.update(part.encode())
        h.update(b"\0")
    return h.hexdigest()[:24]


_loaded: dict[str, ModuleType] = {}


def codegen_fingerprint() -> str:
    """A hash of the code generator's own files and the versions it depends on, so that any
    change to how kernels are written invalidates old cache entries."""
    import numba

    from phaselab import __version__

    here = Path(__file__).parent
    texts = [p.read_text() for p in sorted(here.glob("*.py"))]
    return source_hash(*texts, __version__, numba.__version__, sys.version)


def load_module(name: str, make_source) -> ModuleType:
    """Import the generated module ``<cache>/<name>.py``, writing it first if absent.

    Parameters
    ----------
    name : str
        File stem; it must already encode a hash of everything the source depends on.
    make_source : callable returning str
        Called only when the file is not in the cache (symbolic work is skipped on a warm
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
    if not path.exists():
        source = make_source()
        fd, tmp = tempfile.mkstemp(dir=folder, suffix=".tmp")
        with os.fdopen(fd, "w") as fh:
            fh.write(source)
        os.replace(tmp, path)
    spec = importlib.util.spec_from_file_location(f"phaselab_generated_{name}", path)
    module = importlib.util.module_from_spec(spec)
    sys.modules[spec.name] = module
    spec.loader.exec_module(module)
    _loaded[name] = module
    return module
