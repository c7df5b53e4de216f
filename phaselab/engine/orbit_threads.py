"""Running a compiled loop over independent orbits on several threads.

The loop modules hold no ``parallel=True`` code (numba's parallel compilation costs more than
half the first-call compile time of a loop). An entry point whose orbits are independent
declares the arguments with one row per orbit (``ORBITS`` in its loop file); it is compiled
with ``nogil=True``, so slices of its rows run side by side on ``numba.get_num_threads()``
Python threads. Large batches are cut into up to ``SLICES_PER_THREAD`` contiguous slices per
thread (of at least ``MIN_SLICE_ROWS`` rows), and each thread takes the next slice left when it is free (orbits of one call can
differ a lot in cost: a chaotic orbit steps more, an escaping one stops early, so equal
shares per thread leave one thread idle). Each orbit's arithmetic is the same as in one
call, hence the same numbers to the last bit.
"""

from __future__ import annotations

import threading

import numba
import numpy as np


SLICES_PER_THREAD = 4
"""Slices per thread of a call's rows: enough for a free thread to take work from a busy
one, few enough that the per-slice call (a few microseconds) does not count."""

MIN_SLICE_ROWS = 32
"""Fewest rows of a slice beyond the one-per-thread split: the loops step up to four orbits
side by side, so a slice of a few orbits would leave their lanes empty (a 20-orbit section
on two threads took 1.08x longer cut into eight slices than into two)."""


def split(n_rows: int, slices: int) -> np.ndarray:
    """Bounds of ``min(n_rows, slices)`` contiguous slices of ``n_rows`` rows, shape
    ``(n_slices + 1,)`` (the first 0, the last ``n_rows``)."""
    groups = max(1, min(n_rows, slices))
    return np.linspace(0, n_rows, groups + 1).round().astype(np.int64)


def sliceable(args, positions) -> int:
    """The number of orbits of a call when every argument at ``positions`` is an array with
    that many rows, else 0 (the call then runs whole on the calling thread)."""
    rows = None
    for i in positions:
        a = args[i]
        if not isinstance(a, np.ndarray) or a.ndim == 0:
            return 0
        if rows is None:
            rows = a.shape[0]
        elif a.shape[0] != rows:
            return 0
    return rows or 0


def compiled_for(disp, args) -> bool:
    """Whether the numba dispatcher ``disp`` holds machine code for the types of ``args``."""
    return tuple(numba.typeof(a) for a in args) in disp.overloads


def run_sliced(disp, args, positions, threads: int | None = None, ready: bool = True):
    """Call ``disp(*args)`` on slices of the rows of the arguments at ``positions`` (indices
    into ``args``), shared out to ``threads`` threads (the calling thread one of them) as
    each becomes free.

    Parameters
    ----------
    disp : numba dispatcher
        With ``nogil=True`` (row slices of C-ordered arrays keep their type). With
        ``ready=False`` and no machine code for these types yet, the first slice runs
        alone on the calling thread first, so that compiling (or loading from the cache)
        happens there once, where the compile news watches it.
    args : tuple
        The call's arguments, the kernel first.
    positions : tuple of int
        Indices into ``args`` of the arrays with one row per orbit.
    threads : int, optional
        Default ``numba.get_num_threads()`` (of the calling thread).
    """
    n = sliceable(args, positions)
    threads = int(numba.get_num_threads()) if threads is None else int(threads)
    if n <= 1 or threads <= 1:
        return disp(*args)
    bounds = split(n, max(threads, min(threads * SLICES_PER_THREAD, n // MIN_SLICE_ROWS)))
    parts = []
    for g in range(bounds.shape[0] - 1):
        lo, hi = int(bounds[g]), int(bounds[g + 1])
        part = list(args)
        for i in positions:
            part[i] = args[i][lo:hi]
        parts.append(tuple(part))
    errors: list = []
    first = not ready and not compiled_for(disp, args)
    if first:
        disp(*parts[0])
    queue = iter(parts[1:] if first else parts)
    lock = threading.Lock()

    def work():
        while not errors:
            with lock:
                part = next(queue, None)
            if part is None:
                return
            try:
                disp(*part)
            except BaseException as exc:      # handed to the calling thread
                errors.append(exc)

    helpers = [threading.Thread(target=work, daemon=True) for _ in range(min(threads, len(parts)) - 1)]
    for t in helpers:
        t.start()
    work()
    for t in helpers:
        t.join()
    if errors:
        raise errors[0]
    return None
