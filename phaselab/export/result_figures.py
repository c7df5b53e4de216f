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
from phaselab.export.figures import REPORT_RC, check_size, scalar_colormap


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
    unit = (getattr(system, "units", None) or {}).get(name)
    return f"{name} [{unit}]" if unit else name


def trajectory_figure(tr, axes=(0, None), size=(5.5, 4.5), dpi=150, title=None):
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
        ax.plot(tr.states[k, :, i], tr.states[k, :, j], lw=0.7)
    ax.set_xlabel(_label(tr.system, names[i]))
    ax.set_ylabel(_label(tr.system, names[j]))
    return fig


def chaos_figure(ci, indicator="megno", size=(5.5, 4.0), dpi=150, title=None):
    """Running values of one indicator of a :class:`~phaselab.orbits.chaos.ChaosIndicators`
    against time when its history was kept, else its final value per orbit."""
    if indicator not in ("lyapunov", "megno", "fli", "sali"):
        raise ParameterError(f"indicator must be lyapunov, megno, fli or sali, got {indicator!r}")
    fig, ax = _frame(size, dpi, title or f"{indicator} of {len(ci.status)} orbits")
    history = ci.history.get(indicator) if ci.history else None
    if history is not None and len(ci.t):
        for row in np.atleast_2d(history):
            ax.plot(ci.t, row, lw=0.7)
        ax.set_xlabel("iterate" if ci.method == "map" else "time")
    else:
        ax.plot(np.arange(len(ci.status)), getattr(ci, indicator), "o", ms=3)
        ax.set_xlabel("orbit")
    ax.set_ylabel(indicator)
    return fig


def picture_figure(values, grid, label, size=(5.5, 4.5), dpi=150, title=None):
    """A scan's values over its grid as a picture with a colour bar (values per seed
    against the seed number when there is no grid)."""
    fig, ax = _frame(size, dpi, title)
    values = np.asarray(values, dtype=float)
    if grid is None:
        ax.plot(np.arange(len(values)), values, "o", ms=3)
        ax.set_xlabel("seed")
        ax.set_ylabel(label)
        return fig
    image = values.reshape(grid.shape)
    x, y = np.asarray(grid.x, dtype=float), np.asarray(grid.y, dtype=float)
    art = ax.pcolormesh(x, y, np.ma.masked_invalid(image), cmap=scalar_colormap(), shading="nearest")
    fig.colorbar(art, ax=ax, label=label)
    ax.set_xlabel(str(grid.axis_names[0]))
    ax.set_ylabel(str(grid.axis_names[1]))
    return fig


def parameter_scan_figure(scan, size=(5.5, 4.5), dpi=150, title=None):
    """A parameter scan of numbers: a curve over one parameter, a picture over two."""
    ds = scan.to_xarray()
    names = [n for n in ds.data_vars]
    da = ds[names[0]]
    if da.ndim == 1:
        fig, ax = _frame(size, dpi, title)
        ax.plot(da[da.dims[0]].values, da.values, "o-", ms=3, lw=0.8)
        ax.set_xlabel(str(da.dims[0]))
        ax.set_ylabel(str(names[0]))
        return fig
    if da.ndim == 2:
        fig, ax = _frame(size, dpi, title)
        art = ax.pcolormesh(da[da.dims[1]].values, da[da.dims[0]].values,
                            np.ma.masked_invalid(da.values), cmap=scalar_colormap(), shading="nearest")
        fig.colorbar(art, ax=ax, label=str(names[0]))
        ax.set_xlabel(str(da.dims[1]))
        ax.set_ylabel(str(da.dims[0]))
        return fig
    raise ParameterError(f"a parameter scan is drawn over one or two parameters of numbers; "
                         f"{names[0]} has {da.ndim} dimensions")


def equilibrium_figure(eq, size=(4.5, 4.5), dpi=150, title=None, flow=True):
    """The eigenvalues of an equilibrium in the complex plane, with the imaginary axis
    (flows) or the unit circle (maps) where stability changes."""
    fig, ax = _frame(size, dpi, title or f"{eq.stability} equilibrium")
    ev = np.asarray(eq.eigenvalues, dtype=complex)
    if flow:
        ax.axvline(0.0, color="0.6", lw=0.6)
    else:
        angle = np.linspace(0.0, 2 * np.pi, 361)
        ax.plot(np.cos(angle), np.sin(angle), color="0.6", lw=0.6)
    ax.plot(ev.real, ev.imag, "x", ms=7)
    ax.set_xlabel("Re(eigenvalue)")
    ax.set_ylabel("Im(eigenvalue)")
    return fig


def shell_seeds_figure(seeds, size=(5.0, 4.5), dpi=150, title=None):
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
    return fig


def breakup_figure(tb, size=(5.5, 4.5), dpi=150, title=None):
    """Greene's residues |R| of each convergent's symmetric orbits against the parameter,
    on a log scale, with the threshold."""
    fig, ax = _frame(size, dpi, title or f"residues of the torus of rotation number {tb.rotation_number:.6g}")
    for c, rows in zip(tb.convergents, np.asarray(tb.residues)):
        ax.semilogy(tb.values, np.abs(rows[:, 0]), "o-", ms=3, lw=0.7, label=str(c))
    ax.axhline(tb.threshold, color="0.4", lw=0.7, ls="--", label="threshold")
    ax.set_xlabel(str(tb.parameter))
    ax.set_ylabel("|residue|")
    ax.legend(fontsize=7)
    return fig


def normal_form_figure(nf, j_max=0.1, size=(5.5, 4.0), dpi=150, title=None):
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
    return fig
