"""The energetically forbidden part of a section window as filled polygons: a filled contour
of the level-set values above the energy, on the same grid and with the same linear
interpolation as the boundary curve, so the shade ends exactly on the boundary.

Used by the explorer's bokeh plot and by its static pictures (no bokeh here).
"""

from __future__ import annotations

import numpy as np


def forbidden_polygons(x, y, values, energy) -> list:
    """Polygons covering the grid points where ``values > energy`` (or NaN: no real root).

    Parameters
    ----------
    x : ndarray, shape (nx,)
    y : ndarray, shape (ny,)
    values : ndarray, shape (ny, nx)
        H minimised over the solved component on the grid (units of H).
    energy : float
        The energy E (units of H).

    Returns
    -------
    list of list of ndarray
        One entry per polygon: its outer ring first, then its holes, each ring (m, 2) in the
        shown coordinates. Empty when every grid point is allowed.
    """
    import contourpy

    z = np.array(values, dtype=float)
    finite = np.isfinite(z)
    if not finite.any():  # nothing allowed anywhere: the whole window
        return [[np.array([[x[0], y[0]], [x[-1], y[0]], [x[-1], y[-1]], [x[0], y[-1]]], float)]]
    top = max(float(z[finite].max()), float(energy)) + 1.0
    z[~finite] = top  # no real root: forbidden like a value above the energy
    if not (z > energy).any():
        return []
    gen = contourpy.contour_generator(np.asarray(x, float), np.asarray(y, float), z,
                                      fill_type=contourpy.FillType.OuterOffset)
    points, offsets = gen.filled(float(energy), top + 1.0)
    return [[pts[offs[k]:offs[k + 1]] for k in range(len(offs) - 1)] for pts, offs in zip(points, offsets)]


def polygon_columns(polygons) -> dict:
    """``polygons`` as the ``xs``/``ys`` columns of a bokeh multi-polygon source (one
    multi-polygon holding every polygon, each a list of rings)."""
    xs = [[[ring[:, 0].tolist() for ring in poly] for poly in polygons]]
    ys = [[[ring[:, 1].tolist() for ring in poly] for poly in polygons]]
    return dict(xs=xs, ys=ys)


def polygon_path(polygons):
    """``polygons`` as one matplotlib Path (rings closed; holes by orientation, nonzero
    winding as contourpy orients them)."""
    from matplotlib.path import Path

    verts, codes = [], []
    for poly in polygons:
        for ring in poly:
            if len(ring) < 3:
                continue
            verts.extend(ring.tolist() + [ring[0].tolist()])
            codes.extend([Path.MOVETO] + [Path.LINETO] * (len(ring) - 1) + [Path.CLOSEPOLY])
    if not verts:
        return None
    return Path(np.asarray(verts, float), codes)
