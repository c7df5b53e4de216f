"""One compilation per machine: an exclusive lock on a file shared by every process.

Several processes that start at once on one machine (cluster workers on a node, notebook
kernels) would each compile the same loop at the same moment. Around a compilation they take
:func:`file_lock` on a file in the kernel cache: the first compiles and writes the machine
code, the others wait, then load it. The operating system releases the lock of a process that
dies, so a killed compiler leaves nothing stale behind. Where locking is not available (no
``fcntl``, a folder that cannot be written) the block runs without the lock.
"""

from __future__ import annotations

import contextlib
from pathlib import Path

try:
    import fcntl
except ImportError:  # pragma: no cover - systems without POSIX locks compile without waiting
    fcntl = None


@contextlib.contextmanager
def file_lock(path):
    """Hold an exclusive lock on ``path`` (created if absent) while the block runs.

    Parameters
    ----------
    path : str or Path
        The lock file; its content is never read or written.
    """
    if fcntl is None:
        yield
        return
    try:
        handle = open(Path(path), "a")
    except OSError:
        yield
        return
    with handle:
        fcntl.flock(handle.fileno(), fcntl.LOCK_EX)
        try:
            yield
        finally:
            fcntl.flock(handle.fileno(), fcntl.LOCK_UN)
