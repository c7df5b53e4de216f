"""Ways to read a four-dimensional surface of section.

The section of a flow with three degrees of freedom at fixed energy is a set of points in
4-D: of the six state components, the plane fixes one and the energy the size of its
conjugate, so four *section coordinates* remain (for ``{"q3": 0}``: ``q1, q2, p1, p2``).
The iterates of a 4-D map, and the stroboscopic section of a driven 2-dof system, are
4-D the same way (every state component is a section coordinate there). Three published
ways to look at such a set:

* :func:`section_projection`: a projection onto two (or three) section coordinates,
  coloured by another one (Froeschle's colour-and-rotation method, Astron. Astrophys. 9,
  15, 1970): points close in the projection but far apart in 4-D get different colours;
* :func:`section_slice`: a 3-D phase-space slice, the points whose coordinate ``w`` lies in
  a thin slab ``|w - w0| < eps``, shown in the remaining coordinates (Richter, Lange,
  Baecker and Ketzmerick, Phys. Rev. E 89, 022902, 2014). A 2-torus, cut by the slab,
  shows as one or two closed curves; chaotic orbits fill volumes;
* :func:`projection_grid`: every pairwise projection of the section coordinates at once.

Each returns a :class:`SectionSlice`: the selected points in the shown coordinates with
the orbit and crossing each came from, the recipe (``kind``, ``slab``, ``color``), and
what the section was computed with; ``plot()`` draws it (matplotlib), ``to_xarray()``
labels it, ``save(path)`` writes ``.nc`` or a figure.

These are model results; where they inform a design decision, confirm them with
validated tools and the responsible engineers.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from phaselab.errors import ParameterError
from phaselab.engine import inputs
from phaselab.engine.provenance import netcdf_attrs, provenance, xarray_module
from phaselab.engine.provenance import cf_dataset

__all__ = ["SectionSlice", "section_coordinates", "section_projection", "section_slice",
           "projection_grid"]

KINDS = ("projection", "slice", "grid")
"""What a :class:`SectionSlice` shows."""


@dataclass(repr=False)
class SectionSlice:
    """Points of a surface of section selected and shown in some of its coordinates.

    Attributes
    ----------
    kind : str
        ``"projection"``, ``"slice"`` or ``"grid"`` (see the module docstring).
    points : ndarray, shape (n_points, k)
        The shown coordinates of the selected points, columns in the order of ``axes``.
    orbit : ndarray of int, shape (n_points,)
        The orbit (index into the section's orbits) each point belongs to.
    crossing : ndarray of int, shape (n_points,)
        The crossing number of each point along its orbit (0 for the first).
    axes : tuple of str
        Names of the shown state components (2 or 3; all section coordinates for a grid).
    color : str or None
        Name of the component the points are coloured by (a projection), else None.
    color_values : ndarray, shape (n_points,)
        Its value at each point (empty when ``color`` is None).
    slab : dict or None
        For a slice: ``{"name": w, "center": w0, "half_width": eps}``, the points kept
        having ``|w - w0| < eps`` (strictly).
    coordinates : tuple of str
        The section coordinates (the state components that vary on the section).
    plane : dict
        The section's plane record (:attr:`phaselab.orbits.section_result.Section.plane`).
    energy : float or None
    method : str
    dt : float
    system : object
    params : dict
    """

    kind: str
    points: np.ndarray
    orbit: np.ndarray
    crossing: np.ndarray
    axes: tuple
    color: str | None
    color_values: np.ndarray
    slab: dict | None
    coordinates: tuple
    plane: dict
    energy: float | None
    method: str
    dt: float
    system: object = None
    params: dict = field(default_factory=dict)

    def __post_init__(self):
        if self.kind not in KINDS:
            raise ParameterError(f"SectionSlice.kind must be one of {', '.join(KINDS)}, got {self.kind!r}")
        self.points = np.asarray(self.points, dtype=float).reshape(-1, len(self.axes))
        n = self.points.shape[0]
        self.orbit = np.asarray(self.orbit, dtype=np.int64).reshape(n)
        self.crossing = np.asarray(self.crossing, dtype=np.int64).reshape(n)
        self.color_values = np.asarray(self.color_values, dtype=float).reshape(n if self.color else 0)

    @property
    def n_points(self) -> int:
        return int(self.points.shape[0])

    def column(self, name: str) -> np.ndarray:
        """The values of shown component ``name``, shape (n_points,)."""
        if name not in self.axes:
            raise ParameterError(f"{name!r} is not shown here; the shown components are {', '.join(self.axes)}")
        return self.points[:, self.axes.index(name)]

    def metadata(self) -> dict:
        """Provenance (:func:`phaselab.engine.provenance.provenance`) with the recipe."""
        return provenance(self.system, self.params, kind=self.kind, axes=list(self.axes),
                          color=self.color, slab=self.slab, coordinates=list(self.coordinates),
                          plane=self.plane, energy=self.energy, method=self.method, dt=self.dt)

    def to_xarray(self):
        """The points as an ``xarray.Dataset`` along dimension ``point``: one variable per
        shown component, ``orbit``, ``crossing`` and (for a projection) ``color_value``;
        the provenance and recipe in the attributes."""
        xr = xarray_module()
        data = {name: (("point",), self.points[:, j]) for j, name in enumerate(self.axes)}
        data["orbit"] = (("point",), self.orbit)
        data["crossing"] = (("point",), self.crossing)
        if self.color:
            data["color_value"] = (("point",), self.color_values)
        return cf_dataset(xr.Dataset(data, attrs=netcdf_attrs(self.metadata())))

    def plot(self, **kwargs):
        """A static figure (matplotlib): a scatter for a projection or slice (3-D axes for
        three shown components), a matrix of pairwise projections for a grid. Options in
        :func:`phaselab.export.slice_figures.slice_figure`."""
        from phaselab.export.slice_figures import slice_figure

        return slice_figure(self, **kwargs)

    def save(self, path, **kwargs):
        """Write ``.nc`` data (with provenance) or a figure (``.svg``, ``.pdf``, ``.png``),
        atomically."""
        from phaselab.export import save

        return save(self, path, **kwargs)

    def __repr__(self) -> str:
        what = {"projection": f"projection on {', '.join(self.axes)}"
                + (f" coloured by {self.color}" if self.color else ""),
                "slice": (f"slice |{self.slab['name']} - {self.slab['center']:g}| < "
                          f"{self.slab['half_width']:g} in {', '.join(self.axes)}") if self.slab else "slice",
                "grid": f"grid of {', '.join(self.axes)}"}[self.kind]
        return f"SectionSlice({what}: {self.n_points} points of {len(np.unique(self.orbit))} orbits)"


# ----------------------------------------------------------------------------- coordinates
def section_coordinates(section) -> tuple:
    """The names of the state components that vary on the section.

    For a plane through component ``k`` of a flow: every component but ``k`` and its
    conjugate (fixed by the energy up to its sign, which the crossing direction sets).
    For map iterates and stroboscopic sections: every component.
    """
    names = _names(section)
    if section.plane.get("kind") != "plane":
        return tuple(names)
    k = int(section.plane["index"])
    n = len(names) // 2
    conjugate = k + n if k < n else k - n
    return tuple(name for i, name in enumerate(names) if i not in (k, conjugate))


def _names(section) -> list:
    syms = getattr(section.system, "state_symbols", None)
    width = section.points.shape[2]
    if syms is not None and len(syms) == width:
        return [s.name for s in syms]
    return [f"z{i}" for i in range(width)]


def _indices(section, names, what: str) -> list:
    coords = section_coordinates(section)
    all_names = _names(section)
    if isinstance(names, str) or not hasattr(names, "__iter__"):
        raise ParameterError(f"{what} must be a sequence of component names, got {names!r}")
    names = list(names)
    for name in names:
        if name not in coords:
            raise ParameterError(f"{what}: {name!r} is not a coordinate of this section; its coordinates "
                                 f"are {', '.join(coords)}")
    if len(set(names)) != len(names):
        raise ParameterError(f"{what} names a component twice: {names!r}")
    return [all_names.index(name) for name in names]


def _flat(section):
    """Every recorded point: states (n_points, 2n), orbit and crossing indices."""
    n_orbits, c, m = section.points.shape
    rows = np.arange(c)[None, :] < section.counts[:, None]
    states = section.points[rows]
    keep = np.all(np.isfinite(states), axis=1)
    orbit = np.broadcast_to(np.arange(n_orbits)[:, None], (n_orbits, c))[rows]
    crossing = np.broadcast_to(np.arange(c)[None, :], (n_orbits, c))[rows]
    return states[keep], orbit[keep], crossing[keep]


def _result(section, kind, states, orbit, crossing, idx, axes, color=None, color_values=(), slab=None):
    return SectionSlice(kind=kind, points=states[:, idx], orbit=orbit, crossing=crossing, axes=tuple(axes),
                        color=color, color_values=np.asarray(color_values, dtype=float), slab=slab,
                        coordinates=section_coordinates(section), plane=dict(section.plane),
                        energy=section.energy, method=section.method, dt=section.dt,
                        system=section.system, params=dict(section.params))


def _check_four(section, what: str) -> tuple:
    coords = section_coordinates(section)
    if len(coords) < 3:
        raise ParameterError(f"a {what} needs a section with at least three coordinates; this one has "
                             f"{len(coords)} ({', '.join(coords)}): draw it with Section.plot()")
    return coords


# ----------------------------------------------------------------------------- public
def section_projection(section, axes, *, color=None) -> SectionSlice:
    """The section projected onto two or three of its coordinates, coloured by another.

    Parameters
    ----------
    section : phaselab.orbits.section_result.Section
    axes : sequence of 2 or 3 str
        The shown section coordinates, e.g. ``("q1", "p1")``.
    color : str, optional
        A further section coordinate to colour the points by (Froeschle's method). Default
        for two axes: the first section coordinate not shown; ``None`` for three axes.
        Give ``color=False`` to colour by orbit instead.

    Returns
    -------
    SectionSlice
        ``kind="projection"``, every recorded point.

    Raises
    ------
    ParameterError
        Names that are not section coordinates, repeated names, a wrong number of axes,
        a section with fewer than three coordinates.
    """
    coords = _check_four(section, "coloured projection")
    idx = _indices(section, axes, "axes")
    if len(idx) not in (2, 3):
        raise ParameterError(f"axes must name two or three section coordinates, got {list(axes)!r}")
    if color is None and len(idx) == 2:
        color = next(c for c in coords if c not in axes)
    states, orbit, crossing = _flat(section)
    if color is False or color is None:
        return _result(section, "projection", states, orbit, crossing, idx, axes)
    (c,) = _indices(section, [color], "color")
    if color in axes:
        raise ParameterError(f"color {color!r} is already one of the shown axes {tuple(axes)!r}")
    return _result(section, "projection", states, orbit, crossing, idx, axes, color, states[:, c])


def section_slice(section, name, center, half_width, *, axes=None) -> SectionSlice:
    """A 3-D phase-space slice: the points with ``|w - center| < half_width``.

    Parameters
    ----------
    section : phaselab.orbits.section_result.Section
    name : str
        The sliced section coordinate ``w``.
    center : float
        ``w0``, the middle of the slab.
    half_width : float
        ``eps > 0``, the slab's half-width (same units as ``w``). Thinner slabs show
        sharper structures but keep fewer points (about ``2 eps / range(w)`` of them).
    axes : sequence of 2 or 3 str, optional
        The shown coordinates; default the section coordinates other than ``w``.

    Returns
    -------
    SectionSlice
        ``kind="slice"``; ``slab`` records the selection.

    Raises
    ------
    ParameterError
        Unknown or repeated names, ``w`` among the shown axes, a non-finite centre, a
        half-width that is not a positive finite number.
    """
    _check_four(section, "slice")
    (k,) = _indices(section, [name], "slab coordinate")
    center = inputs.number(center, "center")
    half_width = inputs.number(half_width, "half_width")
    if not half_width > 0:
        raise ParameterError(f"half_width must be positive, got {half_width}")
    if axes is None:
        axes = [c for c in section_coordinates(section) if c != name][:3]
    if name in axes:
        raise ParameterError(f"the slab coordinate {name!r} cannot also be shown")
    idx = _indices(section, axes, "axes")
    if len(idx) not in (2, 3):
        raise ParameterError(f"axes must name two or three section coordinates, got {list(axes)!r}")
    states, orbit, crossing = _flat(section)
    inside = np.abs(states[:, k] - center) < half_width
    slab = {"name": name, "center": center, "half_width": half_width}
    return _result(section, "slice", states[inside], orbit[inside], crossing[inside], idx, axes, slab=slab)


def projection_grid(section, *, coordinates=None) -> SectionSlice:
    """Every recorded point in all the given section coordinates, drawn as a matrix of
    pairwise projections (``plot()``).

    Parameters
    ----------
    section : phaselab.orbits.section_result.Section
    coordinates : sequence of str, optional
        At least two section coordinates; default all of them.

    Returns
    -------
    SectionSlice
        ``kind="grid"``.
    """
    coords = section_coordinates(section) if coordinates is None else coordinates
    idx = _indices(section, coords, "coordinates")
    if len(idx) < 2:
        raise ParameterError(f"a projection grid needs at least two coordinates, got {list(coords)!r}")
    states, orbit, crossing = _flat(section)
    return _result(section, "grid", states, orbit, crossing, idx, coords)

