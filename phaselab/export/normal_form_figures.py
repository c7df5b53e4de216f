"""The figure of :class:`phaselab.scan.normal_form_check.NormalFormCheck`: a normal form's
prediction beside the measurement, for reports.

Left: each mode's frequency shift from its linear frequency (the detuning) against the
launched action, the normal form's ``dH/dJ_k - omega_k`` as a curve and the frequencies measured by Laskar's method as points. Right (when an island
was measured): the section points of the orbits launched across the island in the
normal-form plane (resonant angle ``psi``, action ``I`` along the resonance), librating
orbits dark and circulating ones pale, with the predicted separatrix and the measured
extent. A footer names the system, its parameters, the method, the normal form and the
phaselab version. Built on :class:`matplotlib.figure.Figure` (nothing left in pyplot).
"""

from __future__ import annotations

import math

import numpy as np

from phaselab.engine.provenance import MODEL_NOTE
from phaselab.errors import ParameterError
from phaselab.export import footers
from phaselab.export.figures import ORBIT_COLORS, REPORT_RC, check_size, check_texts

#: points of the predicted curve
CURVE_POINTS = 200
#: librating and circulating section points, and the predicted separatrix
INSIDE_COLOR, OUTSIDE_COLOR, SEPARATRIX_COLOR = "#2b5d7d", "#c9c9c9", "#b8452f"


def normal_form_check_figure(check, size=None, dpi=150, title=None, footer=True, note=MODEL_NOTE):
    """The prediction beside the measurement (see the module docstring).

    Parameters
    ----------
    check : NormalFormCheck
    size : (float, float), optional
        Inches; default (5.5, 4.2) without an island, (10, 4.2) with one.
    dpi : float
    title : str, optional
    footer : bool
        Print the footer line (system, parameters, method, normal form, version).
    note : str, optional
        An extra line under the footer (default: the model-results reminder).

    Returns
    -------
    matplotlib.figure.Figure
    """
    import matplotlib
    from matplotlib.figure import Figure

    island = check.island
    size = size if size is not None else ((10.0, 4.2) if island is not None else (5.5, 4.2))
    width, height = check_size(size, dpi)
    check_texts(title=title, note=note)
    if not np.isfinite(check.measured).any() and not np.isfinite(check.predicted).any():
        raise ParameterError("the check has no finite frequency to draw")
    with matplotlib.rc_context(REPORT_RC):
        fig = Figure(figsize=(width, height), dpi=dpi, facecolor="white")
        lines = footers.footer_lines(footers.footer_text(check), width) if footer else []
        bottom = 0.55 + footers.margin(lines, note, width)
        top = (0.42 if title else 0.2) + (0.2 if island is not None else 0.0)
        panels = 2 if island is not None else 1
        gap = 0.75
        left, right = 0.75, 0.25
        panel_w = (width - left - right - gap * (panels - 1)) / panels
        ax_h = height - bottom - top
        if panel_w < 1.2 or ax_h < 1.0:
            raise ParameterError(f"size {size!r} leaves no room for the plot; make it larger")
        ax = fig.add_axes((left / width, bottom / height, panel_w / width, ax_h / height))
        _detuning(ax, check)
        if island is not None:
            ax2 = fig.add_axes(((left + panel_w + gap) / width, bottom / height, panel_w / width, ax_h / height))
            _island(ax2, island)
        if title:
            fig.text(left / width, 1 - 0.12 / height, str(title), ha="left", va="top", fontsize=11)
        footers.draw(fig, lines, note)
    return fig


def _style(ax):
    for spine in ("top", "right"):
        ax.spines[spine].set_visible(False)
    ax.tick_params(labelsize=8, color="#444444", labelcolor="#333333")


def _detuning(ax, check):
    """Frequency shifts against the launched action: the normal form's as a curve from J = 0
    when the launched actions lie on one ray (as crosses at them otherwise), the measured
    ones as points."""
    J = check.actions
    total = J.sum(axis=1)
    omega = check.normal_form.omega
    top = J[int(np.argmax(total))]
    on_ray = total.max() > 0 and np.allclose(np.outer(total / total.max(), top), J, rtol=1e-9, atol=1e-15)
    for k in range(check.dof):
        color = ORBIT_COLORS[(2 * k) % len(ORBIT_COLORS)]
        if on_ray:
            dense = np.outer(np.linspace(0.0, 1.0, CURVE_POINTS), top)
            ax.plot(dense.sum(axis=1), check.normal_form.frequencies(dense)[:, k] - omega[k], color=color, lw=1.0,
                    label=f"mode {k + 1}, normal form")
        else:
            ax.plot(total, check.predicted[:, k] - omega[k], "x", ms=5, color=color, label=f"mode {k + 1}, normal form")
        ax.plot(total, check.measured[:, k] - omega[k], "o", ms=4, mfc="white", mec=color, mew=1.0,
                label=f"mode {k + 1}, measured")
    label = "J" if check.dof == 1 else " + ".join(f"J{k + 1}" for k in range(check.dof))
    ax.set_xlabel(f"{label} (launched actions)", fontsize=9)
    ax.set_ylabel(f"frequency shift from omega_k ({check.unit})", fontsize=9)
    ax.legend(fontsize=7, frameon=False)
    _style(ax)


def _island(ax, island):
    psi, action = island.psi, island.action
    for inside, color, size in ((False, OUTSIDE_COLOR, 1.2), (True, INSIDE_COLOR, 1.6)):
        rows = island.librating == inside
        ax.scatter(psi[rows].ravel(), action[rows].ravel(), s=size, c=color, linewidths=0,
                   label="librating (inside)" if inside else "circulating (outside)")
    grid = np.linspace(-np.pi, np.pi, CURVE_POINTS)
    upper = island.separatrix(grid)
    ax.plot(grid, upper, color=SEPARATRIX_COLOR, lw=1.1, label="predicted separatrix")
    ax.plot(grid, -upper, color=SEPARATRIX_COLOR, lw=1.1)
    for level in island.edges:
        if math.isfinite(level):
            ax.axhline(level, color=INSIDE_COLOR, lw=0.7, ls="--")
    k = ", ".join(str(x) for x in island.resonance)
    ax.set_xlabel(f"resonant angle psi = k.phi, k = ({k}) (rad)", fontsize=9)
    ax.set_ylabel("action I along k", fontsize=9)
    ax.set_xlim(-np.pi, np.pi)
    ax.set_title(f"island width: predicted {island.predicted_width:.4g}, measured "
                 f"{island.measured_width:.4g} (+- {island.resolution:.2g})", fontsize=8.5)
    ax.legend(fontsize=7, frameon=False, loc="upper right")
    _style(ax)
