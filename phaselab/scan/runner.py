"""Run a function over batches: on the local cores by default, on a Dask cluster when given
a ``distributed.Client``.

Locally the batches run one after another in this process; each batch is one compiled
ensemble call that already uses every core (numba ``prange`` over orbits), so no process
pool is needed. With a client each batch becomes one Dask task; workers on the same machine
share the on-disk kernel cache, remote workers compile once each.
"""

from __future__ import annotations

from typing import Callable, Sequence

from phaselab.errors import PhaselabError


def run_batches(function: Callable, batches: Sequence, client=None, progress: bool = False,
                desc: str = "batches") -> list:
    """``[function(b) for b in batches]``, locally or on a Dask client, in order.

    Parameters
    ----------
    function : callable
        Must be picklable when a client is given (a module-level function or a
        ``functools.partial`` of one).
    batches : sequence
    client : distributed.Client, optional
    progress : bool
        Show a tqdm progress bar over batches.
    desc : str
        Label of the progress bar.

    Returns
    -------
    list
        One result per batch, in the order of ``batches``.
    """
    batches = list(batches)
    bar = None
    if progress:
        from tqdm.auto import tqdm

        bar = tqdm(total=len(batches), desc=desc, unit="batch")
    try:
        if client is None:
            out = []
            for batch in batches:
                out.append(function(batch))
                if bar is not None:
                    bar.update(1)
            return out
        if not hasattr(client, "map") or not hasattr(client, "gather"):
            raise PhaselabError(f"client must be a dask.distributed Client, got {type(client).__name__}")
        from distributed import as_completed

        futures = client.map(function, batches, pure=False)
        index = {f.key: i for i, f in enumerate(futures)}
        out = [None] * len(futures)
        for future in as_completed(futures):
            out[index[future.key]] = future.result()
            if bar is not None:
                bar.update(1)
        return out
    finally:
        if bar is not None:
            bar.close()
