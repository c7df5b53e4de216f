"""Report-ready output of a surface of section: static figures, data files, HTML pages.

``save(section, path)`` picks the format from the suffix:

=========  ====================================================================
``.svg``   vector figure (matplotlib), text kept as text
``.pdf``   vector figure (matplotlib), fonts embedded as TrueType
``.png``   raster figure, ``width * dpi`` by ``height * dpi`` pixels
``.csv``   data with a ``# key: value`` metadata header (see :mod:`.data`)
``.nc``    NetCDF through xarray (needs ``phaselab[lab]``)
``.html``  self-contained interactive bokeh page (works offline)
=========  ====================================================================

A :class:`~phaselab.structures.levels.LevelSet` (phase portrait, zero-velocity curves) is
saved as .svg, .pdf or .png through :func:`save_level_set`.

Importing this package imports neither bokeh nor matplotlib; each is loaded on first use.
"""

from __future__ import annotations

from pathlib import Path

from phaselab.errors import ParameterError
from phaselab.export.data import (load_section, read_section_csv, read_section_netcdf,
                                  write_section_csv, write_section_netcdf)
from phaselab.export.describe import check_section, section_metadata
from phaselab.base.atomic import checked_path
from phaselab.export.figures import ORBIT_COLORS, save_figure, section_figure
from phaselab.export.formats import FORMATS, save_result
from phaselab.export.interactive import bokeh_figure, save_html
from phaselab.export.portraits import level_set_figure, save_level_set

_WRITERS = {
    ".svg": save_figure,
    ".pdf": save_figure,
    ".png": save_figure,
    ".csv": write_section_csv,
    ".nc": write_section_netcdf,
    ".html": save_html,
}

__all__ = ["save", "section_figure", "save_figure", "write_section_csv", "read_section_csv",
           "write_section_netcdf", "read_section_netcdf", "load_section", "bokeh_figure",
           "save_html", "section_metadata", "ORBIT_COLORS", "level_set_figure", "save_level_set"]


def _save_section(section, path, **kwargs):
    path = Path(path)
    suffix = path.suffix.lower()
    writer = _WRITERS.get(suffix)
    if writer is None:
        known = ", ".join(_WRITERS)
        raise ParameterError(
            f"cannot save a section as {suffix or 'a file without suffix'!r} ({path.name}); "
            f"use one of {known}")
    check_section(section)
    if suffix in (".csv", ".nc") and kwargs:
        raise ParameterError(
            f"{suffix} data files take no options, got {', '.join(sorted(kwargs))}")
    if not path.parent.exists():
        raise ParameterError(f"cannot save to {path}: folder {path.parent} does not exist")
    return writer(section, path, **kwargs)


SAVERS = FORMATS
"""The one table ``save`` dispatches on: result type name -> {suffix: writer}
(:data:`phaselab.export.formats.FORMATS`)."""


def save(section, path, **kwargs):
    """Write a result to ``path`` in the format named by its suffix.

    Parameters
    ----------
    section : any phaselab result
        The result (:data:`SAVERS` lists the types, their suffixes and their writers).
    path : str or pathlib.Path
        For a section .svg, .pdf, .png, .csv, .nc, .zarr or .html; for orbits, manifolds
        and families .json, .nc or a figure; for scans .nc, .zarr (no suffix: by size) or
        a figure of the picture; see :data:`SAVERS`.
    **kwargs
        Options of the writer: figure options (size, dpi, title, ...) for images and HTML;
        none for data files.

    Returns
    -------
    pathlib.Path
        The file written.

    Raises
    ------
    ParameterError
        For a suffix the type cannot be saved as (the message names those it can), a section
        without points, options a data file does not take.
        :class:`~phaselab.errors.MissingExtraError` (for .nc) for a missing xarray.
    """
    path = checked_path(path)
    if any(cls.__name__ in FORMATS for cls in type(section).__mro__):
        return save_result(section, path, **kwargs)
    if hasattr(section, "points") and hasattr(section, "axes"):  # a section-like record
        return _save_section(section, path, **kwargs)
    return save_result(section, path, **kwargs)
