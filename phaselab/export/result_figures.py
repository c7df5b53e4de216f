"""Static matplotlib figures of the results that had none: trajectories, chaos indicators,
pictures of scans over a grid, parameter scans, equilibria, seeds on an energy shell and
Greene's residues of a torus breakup.

Each function returns a ``matplotlib.figure.Figure`` (not registered with pyplot) with the
result's names on its axes and the system in its title; :mod:`phaselab.export.formats`
writes them to .svg, .pdf or .png.
"""

from __future__ import annotations

import matplotlib
import numpy as np

from phaselab.errors import ParameterError
from phaselab.export import footers
from phaselab.export.describe import mathtext_label
from phaselab.model.units import with_unit
from phaselab.export.figures import REPORT_RC, check_size, scalar_colormap

#: Colour-bar labels of the chaos indicators, with their unit (``{time}``: the unit of time).
INDICATOR_LABELS = {"megno": "MEGNO (dimensionless)", "fli": "FLI (dimensionless)",
                    "sali": "SALI (dimensionless)", "lyapunov": "largest Lyapunov exponent ({time})"}


def _frame(size, dpi, title):
    """A one-axes figure of ``size`` inches at ``dpi`` with ``title``."""
    from matplotlib.figure import Figure

    width, height = check_size(size, dpi)
    with matplotlib.rc_context(REPORT_RC):
        fig = Figure(figsize=(width, height), dpi=dpi, facecolor="white", layout="constrained")
        ax = fig.add_subplot()
        if title:
            ax.set_title(str(title))
    return fig, ax


def _names(system, width):
    names = [s.name for s in getattr(system, "state_symbols", ())]
    return names if len(names) == width else [f"z{k}" for k in range(width)]


def _label(system, name):
    return _unit_label(getattr(system, "units", None) or {}, name)


def _unit_label(units, name):
    """``name [unit]`` where ``units`` (the model's, ``{name: unit}``) has one, else ``name``."""
    unit = units.get(name)
    return f"{name} [{unit}]" if unit else name


def footers_time(system) -> str:
    """The name of the model's time (``"t"`` unless the model names it)."""
    time = getattr(system, "time", None)
    return getattr(time, "name", None) or "t"


def indicator_label(indicator, time_unit, is_map) -> str:
    """The label of a chaos indicator with its unit: MEGNO, FLI and SALI are dimensionless;
    the Lyapunov exponent is per iterate (maps) or per unit of the model's time
    (``time_unit``, None where the model declares none)."""
    time = "per iterate" if is_map else (f"1/{time_unit}" if time_unit else "per unit of model time")
    return INDICATOR_LABELS.get(indicator, str(indicator)).format(time=time)


def scan_label(quantity, meta) -> str:
    """The colour-bar label of a scan's values with their unit: a chaos indicator (see
    :func:`indicator_label`) or ``"survival time"`` in iterates (maps) or the model's unit
    of time (flows; "model time units" where the model declares none)."""
    is_map = meta.get("system_kind") == "map" or meta.get("method") == "map"
    time_unit = (meta.get("units") or {}).get("t")
    if quantity == "survival time":
        return f"survival time ({'iterates' if is_map else time_unit or 'model time units'})"
    return indicator_label(quantity, time_unit, is_map)


def _with_units(name, da) -> str:
    unit = da.attrs.get("units")
    return f"{name} [{unit}]" if unit else str(name)


def _key(ax, n_lines):
    """A key naming each orbit's colour when there are two to ten orbits (more are one
    entry saying the colours follow the orbit number)."""
    if 1 < n_lines <= 10:
        ax.legend(fontsize=6.5, ncols=2 if n_lines > 5 else 1)
    elif n_lines > 10:
        lines = ax.get_lines()
        ax.legend(handles=lines[:1], labels=[f"{n_lines} orbits, colour by orbit number"], fontsize=6.5)


def _finish(fig, result, footer):
    return fig if result is None else footers.add_footer(fig, result, note=footers.default_note(result),
                                                         footer=footer)


def trajectory_figure(tr, axes=(0, None), size=(5.5, 4.5), dpi=150, title=None, *, footer=True):
    """Orbits of a :class:`~phaselab.orbits.trajectory.Trajectory` in a plane of the state.

    Parameters
    ----------
    axes : (int, int or None)
        State components drawn horizontally and vertically; ``None`` is the momentum
        conjugate to the first (default: the first degree of freedom, q1 against p1).
    """
    width = tr.states.shape[-1]
    i, j = axes
    j = i + width // 2 if j is None else j
    if not (0 <= i < width and 0 <= j < width):
        raise ParameterError(f"axes must be state indices below {width}, got {axes!r}")
    names = _names(tr.system, width)
    name = getattr(tr.system, "name", "") or ""
    fig, ax = _frame(size, dpi, title or f"Trajectories of {name}".strip())
    for k in range(tr.n_orbits):
        ax.plot(tr.states[k, :, i], tr.states[k, :, j], lw=0.7, label=f"orbit {k + 1}")
    _key(ax, tr.n_orbits)
    ax.set_xlabel(_label(tr.system, names[i]))
    ax.set_ylabel(_label(tr.system, names[j]))
    return footers.add_footer(fig, tr, note=footers.default_note(tr), footer=footer)


def chaos_figure(ci, indicator="megno", size=(5.5, 4.0), dpi=150, title=None, *, footer=True):
    """Running values of one indicator of a :class:`~phaselab.orbits.chaos.ChaosIndicators`
    against time when its history was kept, else its final value per orbit."""
    if indicator not in ("lyapunov", "megno", "fli", "sali"):
        raise ParameterError(f"indicator must be lyapunov, megno, fli or sali, got {indicator!r}")
    fig, ax = _frame(size, dpi, title or f"{indicator} of {len(ci.status)} orbits")
    history = ci.history.get(indicator) if ci.history else None
    if history is not None and len(ci.t):
        for k, row in enumerate(np.atleast_2d(history)):
            ax.plot(ci.t, row, lw=0.7, label=f"orbit {k + 1}")
        _key(ax, len(np.atleast_2d(history)))
        ax.set_xlabel("iterate" if ci.method == "map" else _label(ci.system, footers_time(ci.system)))
    else:
        ax.plot(np.arange(len(ci.status)), getattr(ci, indicator), "o", ms=3)
        ax.set_xlabel("orbit")
    time_unit = (getattr(ci.system, "units", None) or {}).get(footers_time(ci.system))
    ax.set_ylabel(indicator_label(indicator, time_unit, ci.method == "map"))
    return footers.add_footer(fig, ci, note=footers.default_note(ci), footer=footer)


def picture_figure(values, grid, label, size=(5.5, 4.5), dpi=150, title=None, *, result=None, footer=True):
    """A scan's values over its grid as a picture with a colour bar (values per seed
    against the seed number when there is no grid); ``label`` names the values with their
    unit, ``result`` (the scan) gives the footer."""
    fig, ax = _frame(size, dpi, title)
    values = np.asarray(values, dtype=float)
    if grid is None:
        ax.plot(np.arange(len(values)), values, "o", ms=3)
        ax.set_xlabel("seed")
        ax.set_ylabel(label)
        return _finish(fig, result, footer)
    image = values.reshape(grid.shape)
    x, y = np.asarray(grid.x, dtype=float), np.asarray(grid.y, dtype=float)
    art = ax.pcolormesh(x, y, np.ma.masked_invalid(image), cmap=scalar_colormap(), shading="nearest")
    fig.colorbar(art, ax=ax, label=label)
    units = footers.units_of(result) if result is not None else {}
    xn, yn = str(grid.axis_names[0]), str(grid.axis_names[1])
    ax.set_xlabel(with_unit(mathtext_label(xn), units.get(xn)))     # typeset as on a section
    ax.set_ylabel(with_unit(mathtext_label(yn), units.get(yn)))
    return _finish(fig, result, footer)


def parameter_scan_figure(scan, size=(5.5, 4.5), dpi=150, title=None, *, footer=True):
    """A parameter scan of numbers: a curve over one parameter, a picture over two."""
    ds = scan.to_xarray()
    names = [n for n in ds.data_vars]
    da = ds[names[0]]
    if da.ndim == 1:
        fig, ax = _frame(size, dpi, title)
        ax.plot(da[da.dims[0]].values, da.values, "o-", ms=3, lw=0.8)
        ax.set_xlabel(str(da.dims[0]))
        ax.set_ylabel(_with_units(names[0], da))
        return _finish(fig, scan, footer)
    if da.ndim == 2:
        fig, ax = _frame(size, dpi, title)
        art = ax.pcolormesh(da[da.dims[1]].values, da[da.dims[0]].values,
                            np.ma.masked_invalid(da.values), cmap=scalar_colormap(), shading="nearest")
        fig.colorbar(art, ax=ax, label=_with_units(names[0], da))
        ax.set_xlabel(str(da.dims[1]))
        ax.set_ylabel(str(da.dims[0]))
        return _finish(fig, scan, footer)
    raise ParameterError(f"a parameter scan is drawn over one or two parameters of numbers; "
                         f"{names[0]} has {da.ndim} dimensions")


def equilibrium_figure(eq, size=(4.5, 4.5), dpi=150, title=None, flow=True, *, footer=True):
    """The eigenvalues of an equilibrium in the complex plane, with the imaginary axis
    (flows) or the unit circle (maps) where stability changes."""
    fig, ax = _frame(size, dpi, title or f"{eq.stability} equilibrium")
    ev = np.asarray(eq.eigenvalues, dtype=complex)
    if flow:
        ax.axvline(0.0, color="0.6", lw=0.6, label="imaginary axis (stability border)")
    else:
        angle = np.linspace(0.0, 2 * np.pi, 361)
        ax.plot(np.cos(angle), np.sin(angle), color="0.6", lw=0.6, label="unit circle (stability border)")
    ax.plot(ev.real, ev.imag, "x", ms=7, label="eigenvalues")
    ax.legend(fontsize=7)
    ax.set_xlabel("Re(eigenvalue)")
    ax.set_ylabel("Im(eigenvalue)")
    return footers.add_footer(fig, eq, note=footers.default_note(eq), footer=footer)


def shell_seeds_figure(seeds, size=(5.0, 4.5), dpi=150, title=None, *, footer=True):
    """The valid seeds on the energy shell in their two free components."""
    if len(seeds.free) != 2:
        raise ParameterError(f"seeds with {len(seeds.free)} free components cannot be drawn in a plane")
    names = _names(seeds.system, seeds.states.shape[1])
    i, j = (names.index(n) for n in seeds.free)
    fig, ax = _frame(size, dpi, title or f"seeds on H = {seeds.energy:g}")
    ok = np.asarray(seeds.valid, dtype=bool)
    ax.plot(seeds.states[ok, i], seeds.states[ok, j], ".", ms=4)
    ax.set_xlabel(_label(seeds.system, names[i]))
    ax.set_ylabel(_label(seeds.system, names[j]))
    return footers.add_footer(fig, seeds, note=footers.default_note(seeds), footer=footer)


def breakup_figure(tb, size=(5.5, 4.5), dpi=150, title=None, *, footer=True):
    """Greene's residues |R| of each convergent's symmetric orbits against the parameter,
    on a log scale, with the threshold."""
    fig, ax = _frame(size, dpi, title or f"residues of the torus of rotation number {tb.rotation_number:.6g}")
    for c, rows in zip(tb.convergents, np.asarray(tb.residues)):
        ax.semilogy(tb.values, np.abs(rows[:, 0]), "o-", ms=3, lw=0.7, label=str(c))
    ax.axhline(tb.threshold, color="0.4", lw=0.7, ls="--", label="threshold")
    ax.set_xlabel(str(tb.parameter))
    ax.set_ylabel("|residue|")
    ax.legend(fontsize=7)
    return footers.add_footer(fig, tb, note=footers.default_note(tb), footer=footer)


def normal_form_figure(nf, j_max=0.1, size=(5.5, 4.0), dpi=150, title=None, *, footer=True):
    """The detuning of a normal form: each angular frequency dH/dJ_k against the action, all
    modes at the same action J in [0, ``j_max``] (the angle-free part for a resonant form)."""
    j_max = float(j_max)
    if not (np.isfinite(j_max) and j_max > 0):
        raise ParameterError(f"j_max must be a positive number, got {j_max!r}")
    fig, ax = _frame(size, dpi, title or f"Detuning of the order-{nf.order} normal form")
    J = np.linspace(0.0, j_max, 101)
    nu = nf.frequencies(np.repeat(J[:, None], nf.dof, axis=1))
    for k in range(nf.dof):
        ax.plot(J, nu[:, k], lw=0.9, label=f"dH/dJ{k + 1}")
    ax.set_xlabel("action J (every mode)")
    ax.set_ylabel("angular frequency")
    ax.legend(fontsize=7)
    return footers.add_footer(fig, nf, note=footers.default_note(nf), footer=footer)
