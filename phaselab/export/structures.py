"""Figures and data files of phase-space structure: periodic orbits, invariant manifolds,
families of orbits.

Periodic orbits are marked by their stability with a shape of their own, so that a figure
printed in grey still tells them apart: a filled circle for stable, a cross for unstable, a
triangle for inverse-unstable, a square for parabolic. Unstable manifold branches are solid
lines, stable ones dashed. Figures may be drawn over a surface of section.
"""

from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np

from phaselab.engine.provenance import MODEL_NOTE, provenance
from phaselab.export import footers
from phaselab.errors import ParameterError
from phaselab.export.marks import BRANCH_STYLE, MARKERS
from phaselab.engine.provenance import cf_dataset




def _kind(obj) -> str:
    return type(obj).__name__


def _orbits_of(items):
    out = []
    for item in items:
        if _kind(item) == "PeriodicOrbits":
            out += list(item.orbits)
        elif _kind(item) == "PeriodicOrbit":
            out.append(item)
        elif _kind(item) == "Family":
            out += list(item.orbits)
    return out


def _manifolds_of(items):
    return [item for item in items if _kind(item) == "Manifold"]


def default_axes(system, plane=None) -> tuple[int, int]:
    """The two state components shown by default, as :func:`phaselab.section` chooses them."""
    m = len(system.state_symbols)
    n = m // 2
    if isinstance(plane, dict) and plane and n > 1:
        name = next(iter(plane))
        k = [s.name for s in system.state_symbols].index(getattr(name, "name", name))
        other = 0 if k % n != 0 else 1
        return other, n + other
    return 0, n


def structure_figure(items, section=None, axes=None, size=(6.0, 4.5), dpi=150, title=None, footer=True,
                     xlim=None, ylim=None, note=MODEL_NOTE, marker_size=7.0, line_width=0.9,
                     section_color="#c4c9cf", about=None):
    """A static figure of periodic orbits and manifolds, over a section if one is given.

    Parameters
    ----------
    items : sequence
        :class:`~phaselab.structures.periodic.PeriodicOrbit`, ``PeriodicOrbits``,
        :class:`~phaselab.structures.manifolds.Manifold` and ``Family`` objects.
    section : Section, optional
        Drawn first, in ``section_color`` (``None`` keeps the section's own colours, see
        :func:`phaselab.export.section_figure`), so the structure stands out.
    axes : pair of str, optional
        The two state components shown (default: the section's, or the section convention).
    about : object, optional
        The result the footer describes (default: the first item).
    Other parameters as for :func:`phaselab.export.section_figure`.

    Returns
    -------
    matplotlib.figure.Figure
    """
    import matplotlib

    from phaselab.export.describe import angle_limits, axis_label
    from phaselab.export.figures import REPORT_RC, check_size, section_figure

    items = list(items)
    orbits = _orbits_of(items)
    manifolds = _manifolds_of(items)
    if not orbits and not manifolds:
        raise ParameterError("nothing to draw: give periodic orbits, manifolds or families")
    system = (orbits[0].system if orbits else manifolds[0].orbit.system)
    if section is not None:
        fig = section_figure(section, size=size, dpi=dpi, title=title, footer=footer, xlim=xlim, ylim=ylim,
                             note=note, point_size=1.2)
        ax = fig.axes[0]
        if section_color is not None:
            for art in ax.collections:
                art.set_color(section_color)
        i, j = section.axes
    else:
        width, height = check_size(size, dpi)
        if axes is not None:
            names = [s.name for s in system.state_symbols]
            i, j = (names.index(getattr(a, "name", a)) for a in axes)
        else:
            plane = orbits[0].plane if orbits else manifolds[0].orbit.plane
            i, j = default_axes(system, plane if isinstance(plane, dict) else None)
        with matplotlib.rc_context(REPORT_RC):
            from matplotlib.figure import Figure

            fig = Figure(figsize=(width, height), dpi=dpi, facecolor="white")
            lines = footers.footer_lines(footers.footer_text(about if about is not None else items[0]),
                                         width) if footer else []
            bottom = 0.55 + footers.margin(lines, note, width)
            top = 0.42 if title else 0.18
            ax = fig.add_axes((0.72 / width, bottom / height, (width - 0.94) / width,
                               (height - bottom - top) / height))
            syms = system.state_symbols
            ax.set_xlabel(axis_label(system, syms[i]), fontsize=11, labelpad=3)
            ax.set_ylabel(axis_label(system, syms[j]), fontsize=11, labelpad=4)
            xlim = xlim if xlim is not None else angle_limits(system, syms[i])   # an angle spans its interval
            ylim = ylim if ylim is not None else angle_limits(system, syms[j])
            for spine in ("top", "right"):
                ax.spines[spine].set_visible(False)
            if title:
                fig.text(0.72 / width, 1 - 0.12 / height, str(title), ha="left", va="top", fontsize=11)
            footers.draw(fig, lines, note)
    with matplotlib.rc_context(REPORT_RC):
        keyed = set()
        for man in manifolds:
            colour, style = BRANCH_STYLE.get(man.branch, ("#333333", "-"))
            for line in man.branches:
                label = f"{man.branch} manifold" if man.branch not in keyed else None
                keyed.add(man.branch)
                ax.plot(line[:, i], line[:, j], color=colour, linestyle=style, linewidth=line_width,
                        zorder=3, label=label)
        seen = set()
        for orbit in orbits:
            marker, colour = MARKERS.get(orbit.stability, ("D", "#333333"))
            label = orbit.stability if orbit.stability not in seen else None
            seen.add(orbit.stability)
            ax.scatter(orbit.points[:, i], orbit.points[:, j], s=marker_size ** 2, marker=marker,
                       c=colour, edgecolors="white", linewidths=0.6, zorder=4, label=label)
        if seen or keyed:
            ax.legend(loc="upper right", fontsize=7.5, frameon=False, handletextpad=0.3, borderaxespad=0.2)
        if section is None:
            ax.margins(0.06)
            if xlim is not None:
                ax.set_xlim(*xlim)
            if ylim is not None:
                ax.set_ylim(*ylim)
    return fig


# ----------------------------------------------------------------------------- data
def _summary(orbit) -> dict:
    names = [s.name for s in orbit.system.state_symbols]
    return {
        "stability": orbit.stability,
        "residue": orbit.residue,
        "rotation_number": orbit.rotation_number,
        "period": orbit.period,
        "crossings": orbit.crossings,
        "energy": orbit.energy,
        "points": {n: orbit.points[:, c].tolist() for c, n in enumerate(names)},
        "monodromy": orbit.monodromy.tolist(),
        "multipliers": [[float(m.real), float(m.imag)] for m in np.atleast_1d(orbit.multipliers)],
        "coordinates": list(orbit.coordinates),
        "residual": orbit.residual,
        "params": orbit.params,
        "method": orbit.method,
        "dt": None if not math.isfinite(orbit.dt) else orbit.dt,
    }


def _write_atomic(path: Path, write) -> Path:
    """``write(tmp)`` into a temporary file beside ``path``, then rename it into place."""
    from phaselab.base.atomic import atomic_path

    path = Path(path)
    if not path.parent.exists():
        raise ParameterError(f"cannot save to {path}: folder {path.parent} does not exist")
    with atomic_path(path) as tmp:
        write(tmp)
    return path


def save_structure(obj, path, **kwargs) -> Path:
    """Write periodic orbits, manifolds or families: ``.json``, ``.nc`` or a figure."""
    path = Path(path)
    suffix = path.suffix.lower()
    if suffix in (".svg", ".pdf", ".png"):
        import matplotlib

        from phaselab.export.figures import REPORT_RC

        if _kind(obj) == "Family":
            from phaselab.export.families import family_figure

            fig = family_figure(obj, **kwargs)
        else:
            section = kwargs.pop("section", None)
            items = [obj, obj.orbit] if _kind(obj) == "Manifold" else [obj]
            fig = structure_figure(items, section=section, **kwargs)
        with matplotlib.rc_context(REPORT_RC):
            return _write_atomic(path, lambda tmp: fig.savefig(tmp, format=suffix[1:], dpi=fig.dpi,
                                                                facecolor="white"))
    if kwargs:
        raise ParameterError(f"{suffix} data files take no options, got {', '.join(sorted(kwargs))}")
    if suffix == ".json":
        data = obj.summary() if hasattr(obj, "summary") else _structure_summary(obj)
        text = json.dumps(data, indent=1, allow_nan=True)
        return _write_atomic(path, lambda tmp: Path(tmp).write_text(text + "\n", encoding="utf-8"))
    if suffix == ".nc":
        ds = cf_dataset(obj.to_xarray())
        return _write_atomic(path, lambda tmp: ds.to_netcdf(tmp))
    raise ParameterError(f"cannot save a {_kind(obj)} as {suffix or 'a file without suffix'!r}; use .json, "
                         ".nc, .svg, .pdf or .png")


def _structure_summary(obj) -> dict:
    orbits = _orbits_of([obj])
    system = orbits[0].system
    out = provenance(system, orbits[0].params)
    out["orbits"] = [_summary(o) for o in orbits]
    return out
