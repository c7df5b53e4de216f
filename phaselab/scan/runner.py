"""Run a scan in chunks: on the local cores by default, on a Dask cluster when given a
``distributed.Client``; with a progress bar when it takes a while; into a Zarr store when
given one (see :mod:`phaselab.scan.store`).

Locally the chunks run one after another in this process; each chunk is one compiled
ensemble call that uses every core (numba ``prange`` over orbits). With a client each chunk
becomes one Dask task that runs its compiled call on one thread: the cluster's parallelism
is its workers' threads, so give the workers one thread per core (``n_workers *
threads_per_worker`` = cores; for dask-jobqueue, ``processes`` and ``cores`` as usual).
Workers on the same machine share the on-disk kernel cache; remote workers compile once
each. A worker lost mid-scan is replaced by the scheduler and its chunks rerun elsewhere.

Chunk size (``batch_size=None``): ``ceil(n / 64)`` rows, at least ``64 x`` the threads of
one call (so that every thread of a local call gets 64 or more orbits; 1 thread per Dask
task) and at most 8192. So a scan has at most about 64 chunks (each a step of the
progress bar and of a resumable store) once it is large, and never starves a core. Inside
a chunk the orbits are interleaved across the threads (thread ``k`` of ``P`` gets rows
``k, k + P, ...``), so that a region of cheap orbits (escaping early) is shared out rather
than handed to one thread.

The progress bar advances by chunks (a compiled call reports nothing until it returns), so
a scan of a single chunk shows none.
"""

from __future__ import annotations

import contextlib
import math
import sys
import time
from dataclasses import dataclass
from typing import Callable, Sequence

import numpy as np

from phaselab.engine import inputs
from phaselab.errors import ParameterError

AUTO_PROGRESS_SECONDS = 2.0
"""A scan shows a progress bar (``progress=None``) once it is expected to take longer."""
CHUNKS_TARGET = 64
ROWS_PER_THREAD = 64
MAX_CHUNK = 8192


# ----------------------------------------------------------------------------- threads
def local_threads() -> int:
    """Threads of one local compiled call (numba's setting in this thread)."""
    import numba

    return int(numba.get_num_threads())


@contextlib.contextmanager
def numba_threads(k: int):
    """Run the enclosed compiled calls on ``k`` threads (restored afterwards; numba's setting
    is per calling thread)."""
    import numba

    before = numba.get_num_threads()
    k = max(1, min(int(k), int(numba.config.NUMBA_NUM_THREADS)))
    if k == before:
        yield
        return
    numba.set_num_threads(k)
    try:
        yield
    finally:
        numba.set_num_threads(before)


def interleave(n: int, parts: int) -> np.ndarray:
    """A permutation of ``range(n)`` whose ``parts`` consecutive blocks each take every
    ``parts``-th index: block ``k`` is ``k, k + parts, ...`` (so that static scheduling over
    blocks gives each thread a sample of the whole chunk)."""
    if parts <= 1 or n <= parts:
        return np.arange(n)
    return np.concatenate([np.arange(k, n, parts) for k in range(parts)])


def run_valid_rows(states, valid, threads, fields: dict, compute: Callable):
    """The scaffolding every chunk function shares: fill the result fields of a chunk, run
    ``compute`` once on the valid rows (interleaved over the threads, see the module
    docstring) and scatter its values back.

    Parameters
    ----------
    states : ndarray, shape (n, 2d)
        The chunk's rows.
    valid : ndarray of bool, shape (n,)
        Rows to run; the others keep their fill values.
    threads : int
        Threads of the compiled call.
    fields : dict
        ``name -> (trailing shape, fill value, dtype)`` of each result field, e.g.
        ``{"values": ((), np.nan, float), "status": ((), NOT_RUN, np.int32)}``.
    compute : callable
        ``compute(states_of_valid_rows) -> (values, info)``, ``values`` a dict of arrays over
        those rows (in the order given), ``info`` what the chunk reports (or None).

    Returns
    -------
    (dict of ndarray, info)
        The fields over all ``n`` rows, and ``compute``'s info (None when no row was valid).
    """
    n = len(states)
    out = {name: np.full((n, *tail), fill, dtype=dtype) for name, (tail, fill, dtype) in fields.items()}
    idx = np.flatnonzero(valid)
    if not idx.size:
        return out, None
    order = idx[interleave(idx.size, threads)]
    with numba_threads(threads):
        values, info = compute(states[order])
    for name, value in values.items():
        out[name][order] = value
    return out, info


def chunk_size(n: int, batch_size=None, client=None) -> int:
    """Rows per chunk: ``batch_size`` when given, else the rule of the module docstring."""
    if batch_size is not None:
        return inputs.count(batch_size, "batch_size")
    threads = 1 if client is not None else local_threads()
    low = ROWS_PER_THREAD * max(threads, 1)
    return int(min(MAX_CHUNK, max(low, math.ceil(n / CHUNKS_TARGET))))


# ----------------------------------------------------------------------------- progress
class Progress:
    """A tqdm bar (notebook-aware) over rows, shown at once (``mode=True``), never
    (``False``), or once the work is expected to take more than
    :data:`AUTO_PROGRESS_SECONDS` (``None``), judged from the chunks finished so far (the bar
    then starts with the elapsed time and the rows already done, so its estimate of the
    time left is right from the start)."""

    def __init__(self, total: int, desc: str, mode=None, initial: int = 0, unit: str = "seed"):
        if mode not in (None, True, False):
            raise ParameterError(f"progress must be True, False or None (automatic), got {mode!r}")
        self.total = int(total)
        self.desc = desc
        self.mode = mode
        self.unit = unit
        self.start = time.perf_counter()
        self.start_wall = time.time()
        self.initial = int(initial)
        self.done = int(initial)
        self.bar = None
        if mode is True:
            self._open()

    def _open(self):
        from tqdm.auto import tqdm

        self.bar = tqdm(total=self.total, desc=self.desc, unit=self.unit, initial=self.initial,
                        smoothing=0.1, dynamic_ncols=True)
        moved = self.done - self.initial
        if moved:
            # backdate the bar to the scan's start so that its rate (and time left) counts
            # the rows already done in this run
            now = getattr(self.bar, "_time", time.time)()
            self.bar.start_t = now - (time.perf_counter() - self.start)
            self.bar.last_print_t = self.bar.start_t
            self.bar.last_print_n = self.initial
            self.bar.update(moved)

    def expected_seconds(self) -> float:
        elapsed = time.perf_counter() - self.start
        moved = self.done - self.initial
        if moved <= 0:
            return elapsed
        return elapsed * (self.total - self.initial) / moved

    def update(self, rows: int):
        self.done += int(rows)
        if self.bar is not None:
            self.bar.update(int(rows))
        elif self.mode is None and self.done < self.total and \
                self.expected_seconds() > AUTO_PROGRESS_SECONDS:
            self._open()

    def close(self):
        if self.bar is not None:
            self.bar.close()


# ----------------------------------------------------------------------------- runs
@dataclass
class RunInfo:
    """How a scan ran.

    Attributes
    ----------
    chunks : int
        Chunks of the scan.
    computed : int
        Chunks computed by this run.
    reused : int
        Chunks read back from the store (finished by an earlier run).
    chunk : int
        Rows per chunk.
    seconds : float
        Wall time of this run.
    where : str
        ``"local"`` or the scheduler's address.
    """

    chunks: int
    computed: int
    reused: int
    chunk: int
    seconds: float
    where: str

    def as_dict(self) -> dict:
        return dict(chunks=self.chunks, computed=self.computed, reused=self.reused, chunk=self.chunk,
                    seconds=self.seconds, where=self.where)


def _check_client(client):
    if client is not None and (not hasattr(client, "map") or not hasattr(client, "gather")):
        raise ParameterError(f"client must be a dask.distributed Client, got {type(client).__name__}")


def _where(client) -> str:
    if client is None:
        return "local"
    try:
        return str(client.scheduler.address)
    except Exception:
        return "dask"


def _execute(function, items, client, on_result, threads):
    """Call ``function(*item, threads)`` for every item; ``on_result(i, result)`` in the order
    results arrive (local: in order)."""
    if client is None:
        for i, item in enumerate(items):
            on_result(i, function(*item, threads))
        return
    from distributed import as_completed

    if not items:
        return
    columns = list(zip(*items))
    futures = client.map(function, *columns, [threads] * len(items), pure=False)
    index = {f.key: i for i, f in enumerate(futures)}
    try:
        for future in as_completed(futures):
            on_result(index[future.key], future.result())
    finally:
        pending = [f for f in futures if not f.done()]
        if pending:
            client.cancel(pending)


def run_batches(function: Callable, batches: Sequence, client=None, progress=None,
                desc: str = "batches") -> list:
    """``[function(b) for b in batches]``, locally or on a Dask client, in order.

    Parameters
    ----------
    function : callable
        Must be picklable when a client is given (a module-level function or a
        ``functools.partial`` of one).
    batches : sequence
    client : distributed.Client, optional
    progress : bool or None
        A progress bar over batches: always, never, or (None) when the work is expected to
        take more than about two seconds.
    desc : str
        Label of the progress bar.

    Returns
    -------
    list
        One result per batch, in the order of ``batches``.
    """
    _check_client(client)
    batches = list(batches)
    out = [None] * len(batches)
    bar = Progress(len(batches), desc, progress, unit="batch")

    def keep(i, result):
        out[i] = result
        bar.update(1)

    try:
        _execute(_Single(function), [(b,) for b in batches], client, keep, None)
    finally:
        bar.close()
    return out


class _Single:
    """``function(item)``, ignoring the threads argument of :func:`_execute` (picklable)."""

    def __init__(self, function):
        self.function = function

    def __call__(self, item, threads):
        return self.function(item)


@dataclass
class ChunkRun:
    """What :func:`run_chunks` returns: the fields over all rows, the first chunk's info, and
    how the run went."""

    fields: dict
    info: dict | None
    run: RunInfo


def run_chunks(work: Callable, rows: np.ndarray, valid: np.ndarray, chunk: int, client=None,
               progress=None, desc: str = "scan", store=None, fingerprint: dict | None = None,
               fill: dict | None = None, unit: str = "seed") -> ChunkRun:
    """Run ``work`` over consecutive chunks of ``rows``, gathering its fields.

    Parameters
    ----------
    work : callable
        ``work(rows_chunk, valid_chunk, threads) -> (fields, info)``, with ``fields`` a dict
        of arrays whose first axis runs over the chunk's rows, and ``info`` a JSON-able dict
        (or None). Picklable when a client is given.
    rows : ndarray, shape (n, ...)
        Seeds (or parameter points).
    valid : ndarray of bool, shape (n,)
        Rows to compute (the others are filled by ``work``).
    chunk : int
        Rows per chunk (a store keeps its own).
    client : distributed.Client, optional
    progress : bool or None
        See :class:`Progress`.
    desc : str
    store : str, os.PathLike or zarr store, optional
        Where finished chunks are kept; a rerun computes only the missing ones.
    fingerprint : dict, optional
        What the scan computes (needed with a store).
    fill : dict, optional
        Fill value per field for rows of chunks that were never computed (not used when
        every chunk completes).
    unit : str
        What a row is, for the progress bar.

    Returns
    -------
    ChunkRun
    """
    _check_client(client)
    t0 = time.perf_counter()
    n = len(rows)
    st = None
    parts: dict = {}
    if store is not None:
        from phaselab.scan.store import ScanStore

        st = ScanStore.open(store, n, chunk, fingerprint or {})
        chunk = st.chunk
        parts, damaged = st.verified()  # only chunks that pass their checksums are reused
        st.warn_damage(damaged)
    n_chunks = -(-n // chunk)
    done = np.zeros(n_chunks, dtype=bool)
    done[list(parts)] = True
    todo = [k for k in range(n_chunks) if not done[k]]
    bounds = [(k * chunk, min(n, (k + 1) * chunk)) for k in range(n_chunks)]
    rows_done = sum(b - a for k, (a, b) in enumerate(bounds) if done[k])
    if st is not None and parts:
        print(f"phaselab: resuming: {len(parts)} of {n_chunks} chunks done (store {st.where})",
              file=sys.stderr, flush=True)
    bar = Progress(n, desc, progress, initial=rows_done, unit=unit)
    infos: list = []

    def keep(i, result):
        k = todo[i]
        fields, info = result
        if st is not None:
            st.write(k, fields, info)
        parts[k] = fields
        if info is not None and not infos:
            infos.append(info)
        bar.update(bounds[k][1] - bounds[k][0])

    threads = 1 if client is not None else local_threads()
    items = [(rows[bounds[k][0]:bounds[k][1]], valid[bounds[k][0]:bounds[k][1]]) for k in todo]
    try:
        _execute(work, items, client, keep, threads)
    finally:
        bar.close()
    reused = [k for k in range(n_chunks) if done[k]]
    info = infos[0] if infos else (st.info() if st is not None else None)
    fields = _assemble(parts, bounds, n, fill or {})
    run = RunInfo(chunks=n_chunks, computed=len(todo), reused=len(reused), chunk=chunk,
                  seconds=time.perf_counter() - t0, where=_where(client))
    return ChunkRun(fields, info, run)


def _assemble(parts: dict, bounds, n: int, fill: dict) -> dict:
    if not parts:
        return {}
    first = parts[min(parts)]
    out = {}
    for name, sample in first.items():
        sample = np.asarray(sample)
        full = np.empty((n,) + sample.shape[1:], dtype=sample.dtype)
        if sample.dtype == object:
            full[...] = None
        else:
            full[...] = fill.get(name, np.nan if sample.dtype.kind == "f" else 0)
        for k, fields in parts.items():
            a, b = bounds[k]
            full[a:b] = fields[name]
        out[name] = full
    return out


__all__ = ["run_batches", "run_chunks", "chunk_size", "interleave", "numba_threads", "local_threads",
           "Progress", "RunInfo", "ChunkRun", "AUTO_PROGRESS_SECONDS"]
