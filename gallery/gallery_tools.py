"""What the gallery notebooks share: their output folder, figures written to disk and shown
inline, the chaotic fraction of an ensemble, a panel of MEGNO maps and the run summary.

The notebooks import this module from their own folder (Jupyter starts a notebook's kernel
there). To run a notebook from elsewhere, put ``gallery/`` on ``PYTHONPATH``, as
tests/test_gallery.py and ``build_notebooks.py --images`` do.

Every file is written to a temporary name in the destination folder, then renamed.
"""

from __future__ import annotations

import json
import math
import os
import tempfile
import uuid
from pathlib import Path

import numpy as np

from phaselab.engine.provenance import plain

#: Time-averaged MEGNO above which an orbit is called chaotic. On quasi-periodic orbits the
#: MEGNO tends to 2, on stable isochronous motion to 0, and on chaotic orbits it grows like
#: lambda t / 2 (Cincotta & Simo 2000, Astron. Astrophys. Suppl. 147, 205), so 3 separates
#: the two once lambda t is a few units.
MEGNO_THRESHOLD = 3.0

MODEL_NOTE = "Model results: confirm with validated tools and the responsible engineers."

_DATA_SUFFIXES = (".csv", ".nc")
# Text in vector figures stays text (SVG) or embedded TrueType (PDF).
_VECTOR_RC = {"svg.fonttype": "none", "pdf.fonttype": 42}


def output_folder(out_dir) -> Path:
    """The notebook's output folder, created if missing."""
    folder = Path(out_dir)
    folder.mkdir(parents=True, exist_ok=True)
    return folder


def write_atomically(path, write) -> Path:
    """Call ``write(temporary_path)`` for a file beside ``path`` (same suffix, so writers that
    go by the suffix pick the right format), then rename it to ``path``.

    Returns
    -------
    Path
        ``path``.
    """
    path = Path(path)
    tmp = path.with_name(f".{path.stem}.{os.getpid()}-{uuid.uuid4().hex[:8]}{path.suffix}")
    try:
        write(tmp)
        os.replace(tmp, path)
    except BaseException:
        tmp.unlink(missing_ok=True)
        raise
    return path


def _is_figure(item) -> bool:
    from matplotlib.figure import Figure

    return isinstance(item, Figure)


def _write(item, path: Path, dpi: float, options: dict) -> None:
    """Write a matplotlib Figure, or a phaselab Section or LevelSet through phaselab.export."""
    if _is_figure(item):
        import matplotlib

        with matplotlib.rc_context(_VECTOR_RC):
            item.savefig(path, format=path.suffix[1:].lower(), dpi=dpi, facecolor="white")
        return
    from phaselab.export import save

    if path.suffix.lower() in _DATA_SUFFIXES:
        save(item, path)
    else:
        save(item, path, dpi=dpi, **options)


def show_png(data: bytes) -> None:
    """Display PNG bytes inline when running in a notebook kernel (no-op in plain Python)."""
    try:
        from IPython import get_ipython
        from IPython.display import Image, display
    except ImportError:  # a core install without IPython: nothing to show
        return
    if get_ipython() is not None:
        display(Image(data=data, format="png"))


def save_and_show(item, out_dir, stem: str, suffixes=(".png",), dpi: float = 110, show: bool = True,
                  **options) -> list[Path]:
    """Write ``item`` as ``out_dir/stem + suffix`` for each suffix and show it inline.

    Parameters
    ----------
    item : matplotlib.figure.Figure, phaselab Section or LevelSet
        A figure is saved with ``savefig``; a section or level set with
        :func:`phaselab.export.save` (a section can also be written as .csv or .nc).
    out_dir : str or Path
    stem : str
        File name without suffix.
    suffixes : sequence of str
        For example ``(".png", ".svg", ".csv")``.
    dpi : float
        Dots per inch of raster output.
    show : bool
        Display the PNG inline (the written .png when there is one, so what the notebook
        shows is the file on disk).
    **options
        Figure options of :func:`phaselab.export.save` for a section or level set (title,
        overlays, note, point_size, size...); not used for a matplotlib Figure.

    Returns
    -------
    list of Path
        The files written, in the order of ``suffixes``.
    """
    folder = output_folder(out_dir)
    if _is_figure(item) and options:
        from phaselab import ParameterError

        raise ParameterError(f"options {sorted(options)} apply to phaselab sections and level sets, "
                             "not to a matplotlib Figure (style the figure before saving it)")
    files = [write_atomically(folder / f"{stem}{suffix}", lambda tmp: _write(item, tmp, dpi, options))
             for suffix in suffixes]
    if show:
        pngs = [f for f in files if f.suffix.lower() == ".png"]
        if pngs:
            show_png(pngs[0].read_bytes())
        else:
            with tempfile.TemporaryDirectory() as tmp:
                png = Path(tmp) / f"{stem}.png"
                _write(item, png, dpi, options)
                show_png(png.read_bytes())
    return files


def chaotic_fraction(megno, threshold: float = MEGNO_THRESHOLD) -> float:
    """Fraction of the orbits with a finite MEGNO whose MEGNO exceeds ``threshold``.

    Parameters
    ----------
    megno : array_like, shape (n_orbits,)
        Time-averaged MEGNO per orbit; NaN (no value: an invalid seed or a stopped orbit)
        is left out.
    threshold : float
        See :data:`MEGNO_THRESHOLD`.

    Returns
    -------
    float
        In [0, 1]; NaN when no orbit has a value.
    """
    values = np.asarray(megno, dtype=float).ravel()
    values = values[np.isfinite(values)]
    if values.size == 0:
        return math.nan
    return float(np.mean(values > threshold))


def megno_panels(maps, titles, xlabel: str, ylabel: str, threshold: float = MEGNO_THRESHOLD,
                 panel_size=(3.3, 3.0)):
    """One picture per chaos map, side by side: MEGNO over the grid of seeds.

    Parameters
    ----------
    maps : sequence of phaselab ChaosMap
        Maps computed on grids (``.image`` and ``.grid`` are used).
    titles : sequence of str
        One per map.
    xlabel, ylabel : str
        Names of the grid's horizontal and vertical components.
    threshold : float
        Drawn as the boundary of the colour scale's upper part: above it, chaotic.
    panel_size : (float, float)
        Inches per panel.

    Returns
    -------
    matplotlib.figure.Figure
        Not registered with pyplot (so it shows only where it is displayed).
    """
    from matplotlib.colors import BoundaryNorm, ListedColormap
    from matplotlib.figure import Figure

    maps = list(maps)
    fig = Figure(figsize=(panel_size[0] * len(maps) + 0.9, panel_size[1]), facecolor="white", layout="constrained")
    axes = fig.subplots(1, len(maps), squeeze=False)[0]
    # regular (MEGNO near 0-2) in cool tones, chaotic (above the threshold) in warm ones
    bounds = [0.0, threshold / 2, threshold, 2 * threshold, 4 * threshold, 16 * threshold]
    cmap = ListedColormap(["#2b5d7d", "#8fbad0", "#f0c27b", "#d8793f", "#9b2f1f"])
    cmap.set_over("#5c1610")
    cmap.set_bad("#e6e6e6")
    norm = BoundaryNorm(bounds, cmap.N)
    art = None
    for ax, cm, title in zip(axes, maps, titles):
        grid = cm.grid
        dx = (grid.x[1] - grid.x[0]) / 2 if len(grid.x) > 1 else 0.5
        dy = (grid.y[1] - grid.y[0]) / 2 if len(grid.y) > 1 else 0.5
        image = np.ma.masked_invalid(np.clip(cm.image, 0.0, None))
        art = ax.imshow(image, origin="lower", cmap=cmap, norm=norm, interpolation="nearest", aspect="auto",
                        extent=(grid.x[0] - dx, grid.x[-1] + dx, grid.y[0] - dy, grid.y[-1] + dy))
        ax.set_title(title, fontsize=9)
        ax.set_xlabel(xlabel)
        ax.tick_params(labelsize=7.5)
    axes[0].set_ylabel(ylabel)
    bar = fig.colorbar(art, ax=list(axes), fraction=0.04, pad=0.02, extend="max", format="%g")
    bar.set_label(f"MEGNO (chaotic above {threshold:g})", fontsize=8)
    bar.ax.tick_params(labelsize=7)
    return fig


def write_summary(out_dir, **values) -> Path:
    """Record the numbers this run produced as ``out_dir/summary.json`` (the gallery tests
    read it back)."""
    text = json.dumps(plain(values, nan_as_none=True), indent=1)
    path = output_folder(out_dir) / "summary.json"
    return write_atomically(path, lambda tmp: tmp.write_text(text))
