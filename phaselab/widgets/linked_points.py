"""The points of a section with four or more coordinates as one table of columns, the slab
of a slice as a mask over it, and what a selection holds (numbers only, no bokeh).

One table feeds every projection of the linked explorer, so a selection made in one
projection is a set of rows, the same in all. The slab keeps the rows with
``|w - w0| < eps`` (strictly), the selection rule of
:func:`phaselab.orbits.slices.section_slice` (Richter, Lange, Baecker and Ketzmerick,
Phys. Rev. E 89, 022902, 2014).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from phaselab.errors import ParameterError


def column_name(j: int) -> str:
    """The data-source column of section coordinate ``j`` (names of the model stay out of
    column names: they travel as data)."""
    return f"c{j}"


def empty_columns(n_coordinates: int) -> dict:
    cols = {column_name(j): np.empty(0) for j in range(n_coordinates)}
    cols.update(orbit=np.empty(0, np.int32), shade=np.empty(0, np.int32), crossing=np.empty(0, np.int32),
                value=np.empty(0))
    return cols


def point_columns(records, n_coordinates: int, n_colors: int) -> dict:
    """Columns of every point of ``records``.

    Parameters
    ----------
    records : sequence of OrbitRecord
        ``points`` of each is (m, n_coordinates), the section coordinates of its crossings;
        ``scalar`` its colour value (MEGNO, ...).
    n_coordinates : int
    n_colors : int
        Size of the orbit palette (``shade`` is the palette index).

    Returns
    -------
    dict of str to ndarray
        ``c0 .. c{k-1}`` (float64), ``orbit``, ``shade``, ``crossing`` (int32, from 1),
        ``value`` (float64, the orbit's scalar on each of its points).
    """
    shown = [r for r in records if r.state is not None and len(r.points)]
    if not shown:
        return empty_columns(n_coordinates)
    pts = np.concatenate([np.asarray(r.points, np.float64).reshape(-1, n_coordinates) for r in shown])
    cols = {column_name(j): np.ascontiguousarray(pts[:, j]) for j in range(n_coordinates)}
    cols["orbit"] = np.concatenate([np.full(len(r.points), r.id, np.int32) for r in shown])
    cols["shade"] = np.concatenate([np.full(len(r.points), (r.id - 1) % n_colors, np.int32) for r in shown])
    cols["crossing"] = np.concatenate([np.arange(1, len(r.points) + 1, dtype=np.int32) for r in shown])
    cols["value"] = np.concatenate([np.full(len(r.points), r.scalar, np.float64) for r in shown])
    return cols


@dataclass(frozen=True)
class Slab:
    """A slab ``|w - center| < half_width`` of section coordinate ``index`` (``name``).

    Attributes
    ----------
    name : str
    index : int
        Column of the coordinate (``c{index}``).
    center : float
    half_width : float
        Positive, in the units of the coordinate.
    """

    name: str
    index: int
    center: float
    half_width: float

    def __post_init__(self):
        if not np.isfinite(self.center):
            raise ParameterError(f"the slab's centre must be finite, got {self.center!r}")
        if not (np.isfinite(self.half_width) and self.half_width > 0):
            raise ParameterError(f"the slab's half-width must be a positive number, got {self.half_width!r}")

    def mask(self, columns) -> np.ndarray:
        """Rows inside the slab, bool (n_rows,)."""
        return np.abs(columns[column_name(self.index)] - self.center) < self.half_width

    def record(self) -> dict:
        return {"name": self.name, "center": float(self.center), "half_width": float(self.half_width)}


def selection_summary(columns, indices) -> tuple[int, list]:
    """How many rows ``indices`` selects and of which orbits (ids, ascending)."""
    idx = np.asarray(indices, dtype=np.int64)
    if idx.size == 0:
        return 0, []
    orbit = columns["orbit"]
    idx = idx[(idx >= 0) & (idx < len(orbit))]
    return int(idx.size), np.unique(orbit[idx]).tolist()
