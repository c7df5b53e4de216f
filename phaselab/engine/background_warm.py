"""Compiling the other common paths in the background, once per machine.

The first time a user waits for a shared loop to compile (an empty kernel cache: a new
machine, a hosted notebook, a fresh cluster image), :func:`start` launches one low-priority
Python process that runs :func:`phaselab.engine.warm.warm`: the other common paths are then
compiled while the user looks at the first answer, and their next calls load instead of
waiting. It is announced in the compile news and never blocks the call that started it.

Once per machine: the child holds an exclusive lock on ``.background-warm.lock`` in the
kernel cache while it runs (a second one exits at once) and writes ``warm-<fingerprint>.done``
when it has finished, after which no process starts another. Only the default loop form
(``PHASELAB_LOOPS=auto``) starts one; ``PHASELAB_BACKGROUND_WARM=0`` turns it off, and a
private temporary cache (see :mod:`phaselab.codegen.cache`) never gets one.

Run as ``python -m phaselab.engine.background_warm`` by :func:`start` only.
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
import threading

from phaselab.base.atomic import atomic_path
from phaselab.codegen.cache import cache_dir, codegen_fingerprint, is_fallback
from phaselab.codegen.progress import log
from phaselab.engine.warm import warm

try:
    import fcntl
except ImportError:  # pragma: no cover - no POSIX locks: no background warm-up
    fcntl = None

_started: list = []
_lock = threading.Lock()


def marker():
    """The file that says the background warm-up of this cache has finished."""
    return cache_dir() / f"warm-{codegen_fingerprint()[:16]}.done"


def wanted() -> bool:
    """Whether this process may start the background warm-up (see the module docstring)."""
    if os.environ.get("PHASELAB_BACKGROUND_WARM", "1").strip() == "0" or fcntl is None:
        return False
    if os.environ.get("PHASELAB_LOOPS", "auto").strip().lower() not in ("", "auto"):
        return False
    return not is_fallback() and not marker().exists()


def start() -> bool:
    """Start the background warm-up unless it is unwanted, finished, or already started by
    this process; returns whether a child process was started. Never raises."""
    with _lock:
        if _started:
            return False
        _started.append(True)
    try:
        if not wanted():
            return False
        env = dict(os.environ, PHASELAB_CACHE_DIR=str(cache_dir()), PHASELAB_QUIET="1",
                   PHASELAB_BACKGROUND_WARM="0")
        subprocess.Popen([sys.executable, "-m", "phaselab.engine.background_warm"], env=env,
                         stdin=subprocess.DEVNULL, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL,
                         start_new_session=True)
    except (OSError, ValueError):
        return False
    log.info("compiling the other common paths in the background, at low priority (once per "
             "machine; this call does not wait for it)")
    return True


def main() -> int:
    """The child: lower its priority, hold the lock, warm every path, write the marker."""
    try:
        os.nice(10)
    except (OSError, AttributeError):
        pass
    folder = cache_dir()
    with open(folder / ".background-warm.lock", "a") as handle:
        try:
            fcntl.flock(handle.fileno(), fcntl.LOCK_EX | fcntl.LOCK_NB)
        except OSError:
            return 0                      # another process is warming this cache
        if marker().exists():
            return 0
        report = warm()
        with atomic_path(marker()) as tmp:
            tmp.write_text(json.dumps(report))
    return 0


if __name__ == "__main__":
    sys.exit(main())
