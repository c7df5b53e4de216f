"""Resumable scans: a Zarr store that keeps every finished chunk of a scan.

A scan over ``n`` seeds (or parameter points) runs in chunks of consecutive indices. Given
``store=...``, each finished chunk is written to the store (its arrays first, then its
"done" flag), so a scan that was interrupted (a crash, a killed job, a closed laptop) and
is started again with the same arguments computes only the chunks not yet done and reads
the rest back. Each seed's result depends only on its own state and the scan's arguments,
so the resumed result equals an uninterrupted one exactly.

Layout of the store (a Zarr group, version 3 format)::

    attrs["phaselab_scan"]   JSON: {"format": 1, "n": ..., "chunk": ..., "fingerprint": {...}}
    attrs["phaselab_info"]   JSON: what the first finished chunk reported (method, step...)
    chunk_done               uint8, shape (n_chunks,): 1 once a chunk's arrays are written
    <field>                  one array per result field, shape (n, ...), chunked like the scan

The fingerprint names what the scan computes (kind, system, parameters, time, method,
step, indicator, seed of the deviation vectors, and a hash of the seeds). A store holding a
different scan is refused with the differences named, never mixed in. Zarr's local store
writes every file through a temporary name, so a chunk interrupted while being written is
simply not marked done. One process writes a store at a time.
"""

from __future__ import annotations

import hashlib
import json
import os
from pathlib import Path

import numpy as np

from phaselab.errors import ParameterError
from phaselab.scan.datasets import zarr_module

FORMAT = 1
DONE = "chunk_done"
SCAN_KEY = "phaselab_scan"
INFO_KEY = "phaselab_info"


def seeds_digest(*arrays) -> str:
    """A short hash of the seeds (and masks) of a scan, for its fingerprint."""
    h = hashlib.sha256()
    for a in arrays:
        a = np.ascontiguousarray(a)
        h.update(str((a.dtype.str, a.shape)).encode())
        h.update(a.tobytes())
    return h.hexdigest()[:24]


def _canonical(value):
    """JSON-stable form of a fingerprint (floats by repr, tuples as lists)."""
    return json.loads(json.dumps(value, sort_keys=True, default=str, allow_nan=True))


class ScanStore:
    """A scan's chunks in a Zarr group (see the module docstring).

    Use :meth:`open`; then :meth:`done` tells which chunks are finished, :meth:`write`
    records one, :meth:`read` returns the stored fields.

    Attributes
    ----------
    n : int
        Seeds (rows) of the scan.
    chunk : int
        Rows per chunk (the store's own, which a resumed run adopts).
    """

    def __init__(self, group, n: int, chunk: int, where: str):
        self.group = group
        self.n = n
        self.chunk = chunk
        self.where = where
        self._arrays = {name: group[name] for name in group.array_keys()}
        self._has_info = INFO_KEY in group.attrs.asdict()

    @property
    def n_chunks(self) -> int:
        return -(-self.n // self.chunk)

    @classmethod
    def open(cls, target, n: int, chunk: int, fingerprint: dict) -> "ScanStore":
        """Open (or create) the store at ``target`` for a scan of ``n`` rows.

        Parameters
        ----------
        target : str, os.PathLike or zarr store
            A folder (created if missing; ``.zarr`` by convention) or any zarr store
            (e.g. one on object storage).
        n : int
        chunk : int
            Rows per chunk for a new store; an existing store keeps its own.
        fingerprint : dict
            What the scan computes; must equal the stored one.

        Raises
        ------
        ParameterError
            The store holds a different scan, or is not a phaselab scan store.
        """
        zarr = zarr_module()
        where = str(target) if isinstance(target, (str, os.PathLike)) else type(target).__name__
        if isinstance(target, (str, os.PathLike)):
            path = Path(target)
            if path.exists() and not path.is_dir():
                raise ParameterError(f"store {where}: a file of that name exists; give a folder for "
                                     "the Zarr store")
            if path.exists() and any(path.iterdir()) and not (path / "zarr.json").exists():
                raise ParameterError(f"store {where}: the folder exists and is not a Zarr store; give "
                                     "a new or empty folder")
            target = str(path)
        fp = _canonical(fingerprint)
        try:
            group = zarr.open_group(store=target, mode="a", zarr_format=3)
        except Exception as exc:
            raise ParameterError(f"store {where}: cannot open it as a Zarr group ({exc})") from None
        attrs = group.attrs.asdict()
        if SCAN_KEY not in attrs:
            if len(list(group.keys())):
                raise ParameterError(f"store {where}: a Zarr group with other content, not a phaselab "
                                     "scan store; give a new folder")
            chunk = int(chunk)
            n_chunks = -(-n // chunk)
            group.attrs.update({SCAN_KEY: json.dumps({"format": FORMAT, "n": int(n), "chunk": chunk,
                                                      "fingerprint": fp}, allow_nan=True)})
            group.create_array(DONE, shape=(max(n_chunks, 1),), chunks=(1,), dtype="uint8", fill_value=0)
            return cls(group, int(n), chunk, where)
        try:
            head = json.loads(attrs[SCAN_KEY])
        except (TypeError, ValueError):
            raise ParameterError(f"store {where}: its scan record is damaged; give a new folder") from None
        if head.get("format") != FORMAT:
            raise ParameterError(f"store {where}: written by another version of the store format "
                                 f"({head.get('format')}); give a new folder")
        old = head.get("fingerprint", {})
        if old != fp or int(head.get("n", -1)) != int(n):
            keys = sorted(k for k in set(old) | set(fp) if old.get(k) != fp.get(k))
            if int(head.get("n", -1)) != int(n):
                keys.append("number of seeds")
            raise ParameterError(f"store {where} holds a different scan (it differs in: "
                                 f"{', '.join(keys)}); use a new store for this one, or the same "
                                 "arguments to resume it")
        return cls(group, int(n), int(head["chunk"]), where)

    # ------------------------------------------------------------------ chunks
    def bounds(self, k: int) -> tuple[int, int]:
        """Rows ``[start, stop)`` of chunk ``k``."""
        return k * self.chunk, min(self.n, (k + 1) * self.chunk)

    def done(self) -> np.ndarray:
        """Finished chunks, bool of shape (n_chunks,)."""
        flags = np.asarray(self._arrays[DONE][:], dtype=bool)
        return flags[:self.n_chunks]

    def info(self):
        """What the first finished chunk reported (or None)."""
        text = self.group.attrs.asdict().get(INFO_KEY)
        return None if text is None else json.loads(text)

    def write(self, k: int, fields: dict, info=None) -> None:
        """Record chunk ``k``: each field's rows, then (after all of them) its done flag.

        Parameters
        ----------
        k : int
        fields : dict of str to ndarray
            Each of shape ``(stop - start, ...)``; numeric or boolean.
        info : dict, optional
            JSON-able description kept once, from the first chunk that has one.
        """
        start, stop = self.bounds(k)
        for name, values in fields.items():
            values = np.asarray(values)
            if values.dtype == object or values.dtype.kind not in "biuf":
                raise ParameterError(f"store {self.where}: field {name!r} holds {values.dtype} values; "
                                     "a store keeps numbers only")
            arr = self._arrays.get(name)
            if arr is None:
                fill = np.nan if values.dtype.kind == "f" else 0
                arr = self.group.create_array(name, shape=(self.n,) + values.shape[1:],
                                              chunks=(self.chunk,) + values.shape[1:], dtype=values.dtype,
                                              fill_value=fill)
                self._arrays[name] = arr
            if tuple(arr.shape[1:]) != values.shape[1:]:
                raise ParameterError(f"store {self.where}: field {name!r} has rows of shape "
                                     f"{tuple(arr.shape[1:])} in the store, {values.shape[1:]} now")
            arr[start:stop] = values
        if info is not None and not self._has_info:
            self.group.attrs.update({INFO_KEY: json.dumps(info, allow_nan=True, default=str)})
            self._has_info = True
        self._arrays[DONE][k] = 1

    def read(self, names=None) -> dict:
        """The stored fields as full arrays (rows of unfinished chunks hold fill values)."""
        names = [k for k in self._arrays if k != DONE] if names is None else names
        return {name: np.asarray(self._arrays[name][:]) for name in names}

    def read_chunk(self, k: int) -> dict:
        """The fields of one finished chunk."""
        start, stop = self.bounds(k)
        return {name: np.asarray(arr[start:stop]) for name, arr in self._arrays.items() if name != DONE}


__all__ = ["ScanStore", "seeds_digest"]
