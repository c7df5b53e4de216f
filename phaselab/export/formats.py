"""The one table of file formats: for each result type, the suffixes it can be saved as and
the writer of each (``FORMATS``), and :func:`save_result`, which every result's ``save``
reaches (through :func:`phaselab.export.save`).

Three kinds of writer serve most types:

- data: :meth:`to_xarray` written as NetCDF (``.nc``) or Zarr (``.zarr``), with the CF
  attributes of :func:`phaselab.engine.provenance.cf_dataset` (no suffix: by size);
- figure: :meth:`plot` written as ``.svg``, ``.pdf`` or ``.png``;
- the type's own writers (a section's CSV and HTML, the JSON summaries of structures, a
  normal form's LaTeX).
"""

from __future__ import annotations

from pathlib import Path

from phaselab.base.atomic import atomic_path, checked_path
from phaselab.engine.provenance import cf_dataset
from phaselab.errors import ParameterError
from phaselab.export.figures import REPORT_RC
from phaselab.scan.datasets import save_dataset

FIGURE_FORMATS = {".svg": "svg", ".pdf": "pdf", ".png": "png"}


def write_data(result, path, **kwargs) -> Path:
    """``result.to_xarray()`` with CF attributes, as NetCDF or Zarr by the suffix."""
    if kwargs:
        raise ParameterError(f"data files take no options, got {', '.join(sorted(kwargs))}")
    return save_dataset(cf_dataset(result.to_xarray()), path)


def write_figure(result, path, **kwargs) -> Path:
    """``result.plot(**kwargs)`` written atomically in the format of the suffix."""
    import matplotlib

    path = Path(path)
    fig = result.plot(**kwargs)
    if not path.parent.exists():
        raise ParameterError(f"cannot save to {path}: folder {path.parent} does not exist")
    with matplotlib.rc_context(REPORT_RC), atomic_path(path) as tmp:
        fig.savefig(tmp, format=FIGURE_FORMATS[path.suffix.lower()], dpi=fig.dpi, facecolor="white")
    return path


def _section(result, path, **kwargs):
    from phaselab.export.data import write_section_csv, write_section_netcdf
    from phaselab.export.describe import check_section
    from phaselab.export.figures import save_figure
    from phaselab.export.interactive import save_html

    suffix = Path(path).suffix.lower()
    check_section(result)
    if suffix in (".csv", ".nc") and kwargs:
        raise ParameterError(f"{suffix} data files take no options, got {', '.join(sorted(kwargs))}")
    if not Path(path).parent.exists():
        raise ParameterError(f"cannot save to {path}: folder {Path(path).parent} does not exist")
    writer = {".csv": write_section_csv, ".nc": write_section_netcdf, ".html": save_html}.get(suffix, save_figure)
    return writer(result, path, **kwargs)


def _structure(result, path, **kwargs):
    from phaselab.export.structures import save_structure

    return save_structure(result, path, **kwargs)


def _level_set(result, path, **kwargs):
    from phaselab.export.portraits import save_level_set

    return save_level_set(result, path, **kwargs)


def _slice(result, path, **kwargs):
    from phaselab.export.slice_figures import save_slice

    return save_slice(result, path, **kwargs)


def _frequencies(result, path, **kwargs):
    from phaselab.export.frequency_figures import save_result

    return save_result(result, path, **kwargs)


def _own_file(result, path, **kwargs):
    if kwargs:
        raise ParameterError(f"these files take no options, got {', '.join(sorted(kwargs))}")
    return result.write_file(path)


DATA = {".nc": write_data, ".zarr": write_data}
FIGURES = {suffix: write_figure for suffix in FIGURE_FORMATS}
SCAN = {"": write_data, **DATA, **FIGURES}

FORMATS = {
    "Section": {**{s: _section for s in (".svg", ".pdf", ".png", ".csv", ".nc", ".html")}, ".zarr": write_data},
    "Trajectory": {**DATA, **FIGURES},
    "ChaosIndicators": {**DATA, **FIGURES},
    "ShellSeeds": {**DATA, **FIGURES},
    "LevelSet": {**DATA, **{s: _level_set for s in FIGURE_FORMATS}},
    "Equilibrium": {**DATA, **FIGURES},
    "TorusBreakup": {**DATA, **FIGURES},
    "PeriodicOrbit": {s: _structure for s in (".json", ".nc", *FIGURE_FORMATS)},
    "PeriodicOrbits": {s: _structure for s in (".json", ".nc", *FIGURE_FORMATS)},
    "Manifold": {s: _structure for s in (".json", ".nc", *FIGURE_FORMATS)},
    "Family": {s: _structure for s in (".json", ".nc", *FIGURE_FORMATS)},
    "SectionSlice": {s: _slice for s in (".nc", *FIGURE_FORMATS)},
    "NormalForm": {**{s: _own_file for s in (".json", ".nc", ".tex")}, **FIGURES},
    "NormalFormCheck": {**DATA, **FIGURES},
    "Frequencies": {s: _frequencies for s in (".nc", *FIGURE_FORMATS)},
    "FrequencyMap": {**SCAN, **{s: _frequencies for s in FIGURE_FORMATS}},
    "ChaosMap": SCAN,
    "EscapeMap": SCAN,
    "ParameterScan": SCAN,
}
"""Result type name -> {suffix: writer(result, path, **options)}: the one table ``save`` uses."""


def formats_of(result) -> dict:
    """The suffix table of ``result``'s type (or of the first base class in :data:`FORMATS`)."""
    for cls in type(result).__mro__:
        table = FORMATS.get(cls.__name__)
        if table is not None:
            return table
    raise ParameterError(f"phaselab cannot save a {type(result).__name__}; it saves "
                         + ", ".join(FORMATS))


def save_result(result, path, **kwargs) -> Path:
    """Write ``result`` to ``path`` in the format of its suffix (:data:`FORMATS`).

    Raises
    ------
    ParameterError
        For a suffix the type has no writer for; the message names those it has.
    """
    path = checked_path(path)
    table = formats_of(result)
    suffix = path.suffix.lower()
    writer = table.get(suffix)
    if writer is None:
        fits = ", ".join(s for s in table if s) + (" (or no suffix: .nc or .zarr by size)" if "" in table else "")
        raise ParameterError(f"cannot save a {type(result).__name__} as "
                             f"{suffix or 'a file without suffix'!r} ({path.name}); use {fits}")
    return writer(result, path, **kwargs)
