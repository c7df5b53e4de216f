"""The explorer's normal-form curves: the normal form's invariant curves at the current energy.

Outside references: the energy shell checked with sympy's lambdify of each model's expression
(beside the model's own ``energy()``), and sections of orbits launched on the curves
(``phaselab.section``, a 6th-order symplectic integrator): an invariant curve of the normal
form must hold the section points of the orbit started on it, to the order's accuracy.
"""

from __future__ import annotations

import numpy as np
import pytest
import sympy as sp

import phaselab
from phaselab.errors import ModelError, ParameterError
from phaselab.export.marks import BRANCH_STYLE, MARKERS
from phaselab.widgets import theme
from phaselab.widgets.explorer.normal_form_curves import CURVE_COLOR
from phaselab.widgets.normal_form_overlay import NormalFormOverlay, check_count, conserved_action, find_resonance
from phaselab.widgets.views import make_view

pytest.importorskip("ipywidgets")
pytest.importorskip("jupyter_bokeh")

x, y, px, py = sp.symbols("x y px py", real=True)
PLANE = {"x": 0.0}
E = 0.01


def henon_heiles_expr():
    """H of Henon & Heiles (1964), written out here as the outside reference."""
    return (px**2 + py**2) / 2 + (x**2 + y**2) / 2 + x**2 * y - y**3 / 3


def two_modes():
    """Our own two coupled modes, frequencies 1 and 7/4 (no resonance up to order 10)."""
    H = (px**2 + x**2) / 2 + (py**2 + sp.Rational(49, 16) * y**2) / 2 + x**2 * y + x * y**2 / 3 - y**3 / 5 + x**4 / 7
    return phaselab.Hamiltonian(H, [x, y], [px, py], name="two modes"), H


def section_view(system, energy):
    view = make_view(system, plane=PLANE, solve_for=None, sign=1, crossings=100, ranges=None, duration=None,
                     method="auto", dt=None)
    view.fit_ranges(energy, {})
    return view


def distance_to_polyline(points, curve):
    """Smallest distance from each point (n, 2) to the segments of a polyline (NaN rows break it)."""
    a, b = curve[:-1], curve[1:]
    keep = np.all(np.isfinite(a), axis=1) & np.all(np.isfinite(b), axis=1)
    a, b = a[keep], b[keep]
    ab = b - a
    t = np.clip(np.einsum("pk,sk->ps", points, ab) - np.einsum("sk,sk->s", a, ab), 0, None)
    t = np.minimum(t / np.maximum(np.einsum("sk,sk->s", ab, ab), 1e-300), 1.0)
    nearest = a[None] + t[..., None] * ab[None]
    return np.linalg.norm(points[:, None, :] - nearest, axis=2).min(axis=1)


def orbit_distance(system, curves, level):
    """Largest distance of the section points of an orbit launched on the longest piece of
    ``level`` from all the pieces of that level (a level line may come in pieces)."""
    idx = [i for i, lev in enumerate(curves.level_of) if lev == level]
    start = max(idx, key=lambda i: len(curves.lines[i]))
    states = curves.states[start][np.all(np.isfinite(curves.states[start]), axis=1)]
    sec = phaselab.section(system, states[len(states) // 3][None], plane=PLANE, crossings=120,
                           method="yoshida6", dt=0.02)
    points = sec.points[0, :sec.counts[0]][:, [1, 3]]
    joined = np.concatenate([np.vstack([curves.lines[i], [[np.nan, np.nan]]]) for i in idx])
    return distance_to_polyline(points, joined).max()


def test_henon_heiles_curves_hold_the_orbits_launched_on_them(hh):
    """Henon-Heiles is 1:1 resonant: the overlay takes the resonant form and draws level lines
    of J1 + J2. Their points are on the shell H = E (sympy's H to rounding, as is the model's
    energy()), and the orbit started on each level stays on it: within 5e-4 (about 0.2 % of
    the curves' size) at order 8, and order 8 closer than order 6 by a factor of 4 or more."""
    reference = sp.lambdify((x, y, px, py), henon_heiles_expr(), "numpy")
    view = section_view(hh, E)
    overlay = NormalFormOverlay(hh)
    worst = {}
    for order in (6, 8):
        curves = overlay.curves(view, E, {}, order, 3)
        assert curves.resonance == (1, -1) and curves.action == (1, 1) and curves.label.endswith("(1:1 resonant)")
        assert sorted(set(curves.level_of)) == [0, 1, 2]
        for s in curves.states:
            assert np.all(np.isfinite(s)) and np.allclose(s[:, 0], 0.0)
            assert np.abs(reference(*s.T) - E).max() < 1e-12                      # sympy's H
            assert np.abs(hh.energy(s) - reference(*s.T)).max() < 1e-13           # the model's H
        worst[order] = max(orbit_distance(hh, curves, level) for level in range(3))
    assert worst[8] < 5e-4
    assert worst[8] < worst[6] / 4
    # far above the escape energy 1/6 the order-4 form misses E over most of the window
    with pytest.raises(ModelError, match="outside the range where the order-4 normal form holds"):
        overlay.curves(view, 0.5, {}, 4, 3)


def test_birkhoff_tori_lie_on_the_shell_to_the_order():
    """Without resonance the overlay draws invariant_curve of actions J on the normal form's
    shell nf.energy(J) = E (brentq). The model's H on those points misses E by the order's
    error: below 0.5 % of E at order 4, several times less at order 6 (sympy's H as the
    reference); the orbit launched on each torus stays within 1e-3 of its curve at order 4
    and within 2e-4 at order 6 (curves about 0.26 across)."""
    system, H = two_modes()
    reference = sp.lambdify((x, y, px, py), H, "numpy")
    view = section_view(system, E)
    overlay = NormalFormOverlay(system)
    shell, worst = {}, {}
    for order in (4, 6):
        curves = overlay.curves(view, E, {}, order, 3)
        assert curves.resonance is None and len(curves.lines) == 3 and curves.label == f"normal form, order {order}"
        nf, _ = overlay.normal_form({}, order)
        assert float(nf.energy0) == 0.0 and np.allclose(nf.equilibrium, 0.0)
        misses = []
        for s in curves.states:
            s = s[np.all(np.isfinite(s), axis=1)]
            assert len(s) > 200 and np.allclose(s[:, 0], 0.0, atol=1e-15)
            assert np.allclose(system.energy(s), reference(*s.T), rtol=0, atol=1e-15)
            misses.append(np.abs(reference(*s.T) - E).max() / E)
        shell[order] = max(misses)
        assert abs(shell[order] - curves.mismatch) < 1e-12   # the status line's figure
        worst[order] = max(orbit_distance(system, curves, level) for level in range(3))
    assert shell[4] < 5e-3 and shell[6] < shell[4] / 4
    assert worst[4] < 1e-3 and worst[6] < 2e-4


def test_the_explorer_draws_and_redraws_the_curves(hh):
    """The control computes the curves in the explorer, keys them, follows the energy, and
    clears them when switched off; the dashed colour is used by no orbit, mark or manifold."""
    ex = phaselab.explore(hh, energy=E, background=False)
    try:
        ex.nf_order.value = 6
        ex.nf_count.value = 3
        ex.nf_toggle.value = True
        ex.wait()
        first = [np.asarray(v) for v in ex.nf_source.data["xs"]]
        assert len(first) >= 3 and ex.nf_key.visible
        assert ex.nf_key.items[0].label["value"] == "normal form, order 6 (1:1 resonant)"
        assert "Drew 3 invariant curves" in ex.status and "refused" not in ex.controls.status.value
        ex.set_energy(0.02)
        ex.wait()
        assert max(np.nanmax(np.abs(v)) for v in ex.nf_source.data["xs"]) > max(np.nanmax(np.abs(v)) for v in first)
        ex.set_energy(-0.01)   # below the equilibrium's energy: nothing to draw
        ex.wait()
        assert "No normal-form curves" in ex.status and "not above" in ex.status
        assert "refused" in ex.controls.status.value and len(ex.nf_source.data["xs"]) == 0
        ex.show_normal_form_curves(True, order=7)
        assert "order must be one of 4, 6, 8" in ex.status and ex.nf_order.value == 6
        ex.show_normal_form_curves(False)
        assert not ex.nf_key.visible and len(ex.nf_source.data["xs"]) == 0
    finally:
        ex.close()
    used = set(theme.ORBIT_COLORS) | {c for _, c in MARKERS.values()} | {c for c, _ in BRANCH_STYLE.values()}
    assert CURVE_COLOR not in used | {theme.BOUNDARY, theme.REFUSED, theme.MUTED, theme.INK}


def test_no_elliptic_equilibrium_is_refused_in_the_status_line():
    """A saddle in x (an inverted pendulum near its top, to lowest order) with a spring in y:
    the only equilibrium is a saddle-centre, so the control refuses in words."""
    system = phaselab.Hamiltonian((px**2 + py**2) / 2 - x**2 / 2 + y**2 / 2, [x, y], [px, py], name="saddle")
    ex = phaselab.explore(system, energy=0.05, plane={"y": 0.0}, background=False,
                          ranges=((-1.0, 1.0), (-1.0, 1.0)))
    try:
        ex.show_normal_form_curves(True, order=4)
        ex.wait()
        assert "No normal-form curves" in ex.status and "no elliptic equilibrium" in ex.status
        assert "refused" in ex.controls.status.value and len(ex.nf_source.data["xs"]) == 0
    finally:
        ex.close()


def test_small_helpers():
    """Resonances found from the frequencies, the action they conserve, counts checked."""
    assert find_resonance(np.array([1.0, 1.0]), 4) == (1, -1)
    assert find_resonance(np.array([2.0, 1.0]), 4) == (1, -2)
    assert find_resonance(np.array([1.0, np.sqrt(2.0)]), 8) is None
    for k in ((1, -1), (1, -2), (2, -1), (1, 1)):
        m = conserved_action(k)
        assert m[0] * k[0] + m[1] * k[1] == 0 and any(m)
    with pytest.raises(ParameterError):
        check_count(0)
