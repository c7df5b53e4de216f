"""Static figures of level sets: phase portraits of one degree of freedom (with their
separatrices) and boundaries of the energetically allowed region, through matplotlib.

Like :mod:`phaselab.export.figures`, figures are plain :class:`matplotlib.figure.Figure`
objects (no pyplot state) written as SVG, PDF or PNG.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from phaselab.errors import ParameterError
from phaselab.export import footers
from phaselab.export.describe import mathtext_label
from phaselab.export.figures import REPORT_RC, FIGURE_SUFFIXES, check_size, check_texts, scalar_colormap
from phaselab.base.atomic import atomic_path

#: Colour of separatrices and of the allowed-region boundary.
SEPARATRIX_COLOR = "#8e3b2e"
#: Fill of the energetically forbidden part of a single-level picture.
FORBIDDEN_FILL = "#ece8df"


def _check_level_set(ls) -> None:
    for name in ("x", "y", "values", "levels", "lines", "axes"):
        if not hasattr(ls, name):
            raise ParameterError(f"expected a LevelSet (from phaselab.level_set), got {type(ls).__name__}")
    if not any(len(pieces) for pieces in ls.lines) and not getattr(ls, "separatrices", None):
        raise ParameterError("the level set has no contour inside its grid; widen the ranges or change the levels")


def level_set_figure(ls, size=(5.5, 4.5), dpi=150, title=None, shade_forbidden=None, footer=True,
                     line_width=0.8):
    """A static figure of a :class:`~phaselab.structures.levels.LevelSet`.

    Parameters
    ----------
    ls : LevelSet
    size : (float, float)
        Width and height in inches.
    dpi : float
        Dots per inch for PNG.
    title : str, optional
    shade_forbidden : bool, optional
        Fill the region where the grid values exceed the (single) level: the energetically
        forbidden region of a zero-velocity picture. Default: on when there is one level.
    footer : bool
        Lines under the plot: the system, what was contoured, the parameters, the version.
    line_width : float
        Width of the level curves in points (separatrices are drawn 1.6 times wider).

    Returns
    -------
    matplotlib.figure.Figure
    """
    import matplotlib

    _check_level_set(ls)
    width, height = check_size(size, dpi)
    check_texts(title=title)
    levels = np.atleast_1d(np.asarray(ls.levels, dtype=float))
    shade = (len(levels) == 1) if shade_forbidden is None else bool(shade_forbidden)
    with matplotlib.rc_context(REPORT_RC):
        from matplotlib.figure import Figure

        fig = Figure(figsize=(width, height), dpi=dpi, facecolor="white")
        left, right, top = 0.72, 0.22, (0.42 if title else 0.18)
        lines = footers.footer_lines(footers.footer_text(ls), width) if footer else []
        bottom = 0.55 + footers.margin(lines)
        ax_w, ax_h = width - left - right, height - bottom - top
        if ax_w < 0.8 or ax_h < 0.6:
            raise ParameterError(f"size {size!r} leaves no room for the plot; make it larger")
        ax = fig.add_axes((left / width, bottom / height, ax_w / width, ax_h / height))
        if shade:
            with np.errstate(invalid="ignore"):
                forbidden = np.where(np.isfinite(ls.values), ls.values > levels.max(), True)
            ax.contourf(ls.x, ls.y, forbidden.astype(float), levels=[0.5, 1.5], colors=[FORBIDDEN_FILL],
                        zorder=1)
            from matplotlib.patches import Patch

            keys = [Patch(color=FORBIDDEN_FILL, label="above the level (forbidden)")]
        else:
            keys = []
        cmap = scalar_colormap()
        for k, pieces in enumerate(ls.lines):
            colour = cmap(0.15 + 0.7 * k / max(len(ls.lines) - 1, 1)) if len(ls.lines) > 1 else SEPARATRIX_COLOR
            for n, piece in enumerate(pieces):
                ax.plot(piece[:, 0], piece[:, 1], color=colour, linewidth=line_width, zorder=2,
                        label=f"level {levels[k]:.4g}" if n == 0 and k < len(levels)
                        and (len(ls.lines) <= 6 or k in (0, len(ls.lines) - 1)) else None)
        for s, sep in enumerate(getattr(ls, "separatrices", None) or []):
            for n, piece in enumerate(sep.lines):
                ax.plot(piece[:, 0], piece[:, 1], color=SEPARATRIX_COLOR, linewidth=1.6 * line_width,
                        zorder=3, label="separatrix" if s == 0 and n == 0 else None)
            q, p = np.asarray(sep.equilibrium.state, dtype=float)[:2]
            ax.plot([q], [p], marker="o", markersize=3.5, color=SEPARATRIX_COLOR, zorder=4, linestyle="",
                    label="hyperbolic equilibrium" if s == 0 else None)
        handles = keys + [h for h in ax.get_lines() if not h.get_label().startswith("_")]
        if len(handles) > 1:
            ax.legend(handles=handles, loc="upper right", fontsize=6.5, frameon=True, framealpha=0.85,
                      edgecolor="none", handletextpad=0.4, borderaxespad=0.2, labelspacing=0.25)
        ax.set_xlim(ls.x[0], ls.x[-1])
        ax.set_ylim(ls.y[0], ls.y[-1])
        ax.set_xlabel(mathtext_label(ls.axes[0]), fontsize=11, labelpad=3)
        ax.set_ylabel(mathtext_label(ls.axes[1]), fontsize=11, labelpad=4)
        ax.tick_params(labelsize=8, color="#444444", labelcolor="#333333")
        for spine in ("top", "right"):
            ax.spines[spine].set_visible(False)
        if title:
            fig.text(left / width, 1 - 0.12 / height, str(title), ha="left", va="top", fontsize=11,
                     color="#1e1e1e")
        footers.draw(fig, lines)
    return fig


def save_level_set(ls, path, **kwargs) -> Path:
    """Write a static figure of a level set to ``path`` (.svg, .pdf or .png).

    ``kwargs`` go to :func:`level_set_figure`. Returns the path written.
    """
    path = Path(path)
    fmt = FIGURE_SUFFIXES.get(path.suffix.lower())
    if fmt is None:
        raise ParameterError(f"a level set is written as .svg, .pdf or .png, not {path.suffix or 'no suffix'!r}")
    if not path.parent.exists():
        raise ParameterError(f"folder {str(path.parent)!r} does not exist")
    fig = level_set_figure(ls, **kwargs)
    with atomic_path(path) as tmp:
        fig.savefig(tmp, format=fmt, dpi=fig.dpi, facecolor="white")
    return path
