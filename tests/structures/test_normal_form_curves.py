"""A normal form's invariant curves and a resonant form's separatrix on a surface of section.

Outside references: sections of integrated orbits (phaselab.section) and the periodic orbits
at the island's centre and X-point found by Newton's method on the return map
(phaselab.periodic_orbit); the model's own H.
"""

import numpy as np
import pytest
import sympy as sp

import phaselab
from phaselab import ModelError, ParameterError

q1, q2, p1, p2 = sp.symbols("q1 q2 p1 p2", real=True)


def two_modes():
    """Frequencies 1 and sqrt(2), no resonance below degree 7."""
    H = (p1**2 + q1**2) / 2 + (p2**2 + 2 * q2**2) / 2 + q1**2 * q2 + q1 * q2**2 / 3 - q2**3 / 5 + q1**4 / 7
    return phaselab.Hamiltonian(H, [q1, q2], [p1, p2], name="two modes")


def distance_to_polyline(points, curve):
    """Smallest distance from each point to the segments of a closed polyline (2-D)."""
    a, b = curve[:-1], curve[1:]
    ab = b - a
    t = np.clip(np.einsum("pk,sk->ps", points, ab) - np.einsum("sk,sk->s", a, ab), 0, None)
    t = np.minimum(t / np.einsum("sk,sk->s", ab, ab), 1.0)
    nearest = a[None] + t[..., None] * ab[None]
    return np.linalg.norm(points[:, None, :] - nearest, axis=2).min(axis=1)


def test_torus_curve_lies_on_the_section_of_its_orbit():
    """The orbit launched on the torus J (from_normal) crosses q1 = 0 on the curve the normal
    form draws for J (reference: the section of the integrated orbit). At order 4 the
    distance falls like J^2 (|z|^4: quartering J divides it by about 16); order 6 is closer
    by far at the same J."""
    system = two_modes()
    worst = {}
    for order, a in ((4, 0.004), (4, 0.001), (6, 0.004)):
        nf = phaselab.normal_form(system, [0, 0, 0, 0], order)
        J = np.array([a, a / 2])
        curve = nf.invariant_curve(J, {"q1": 0.0}, points=1600)
        assert not np.isnan(curve).any() and np.allclose(curve[:, 0], 0.0, atol=1e-15)
        sec = phaselab.section(system, nf.from_normal([J], [[0.3, 0.1]]), plane={"q1": 0.0}, crossings=150,
                               method="yoshida6", dt=0.02)
        points = sec.points[0, :sec.counts[0]][:, [1, 3]]
        worst[order, a] = distance_to_polyline(points, curve[:, [1, 3]]).max()
    assert worst[4, 0.004] < 1e-4
    assert worst[4, 0.004] / worst[4, 0.001] > 8
    assert worst[6, 0.004] < worst[4, 0.004] / 30


def detuned_two_to_one():
    H = ((p1**2 + q1**2) / 2 + (p2**2 + sp.Rational(21, 10)**2 * q2**2) / 2
         + sp.Rational(1, 200) * q1**2 * q2 + q1**4 / 10)
    return phaselab.Hamiltonian(H, [q1, q2], [p1, p2], name="detuned two to one")


def test_separatrix_meets_at_the_x_point_found_by_newton():
    """The 2:1 island on the section q1 = 0: the predicted separatrix's two branches meet at
    the X-point (I = 0, psi = psi_c + pi), and the island's centre is at I = 0, psi = psi_c.
    Newton's method on the return map (phaselab.periodic_orbit) started there finds an
    unstable and a stable orbit; each lies within a tenth of the island's size (the distance
    from centre to X-point) of its prediction."""
    system = detuned_two_to_one()
    nf = phaselab.normal_form(system, [0, 0, 0, 0], 6, resonances=[(2, -1)])
    check = phaselab.normal_form_check(system, nf, [[0.05, 0.1]], 100.0, samples=256, island=[0.17, 0.1])
    island = check.island
    curves = check.separatrix_curves({"q1": 0.0}, points=161)
    assert len(curves) == 2                       # one island on this plane: upper and lower branch
    psi = np.linspace(-np.pi, np.pi, 161)
    x_at = int(np.argmin(np.abs(np.angle(np.exp(1j * (psi - island.center_angle - np.pi))))))
    predicted_x = curves[0][x_at]
    assert np.allclose(predicted_x, curves[1][x_at], atol=1e-12)   # I = 0 on both branches
    predicted_o = _centre_on_plane(nf, island)
    size = np.linalg.norm(predicted_x - predicted_o)
    E = float(system.energy(predicted_x[None])[0])
    for guess, stability in ((predicted_x, "unstable"), (predicted_o, "stable")):
        orbit = phaselab.periodic_orbit(system, guess, 1, plane={"q1": 0.0}, energy=E, method="yoshida6", dt=0.02)
        assert orbit.stability == stability
        assert np.linalg.norm(orbit.points[0] - guess) < 0.1 * size


def _centre_on_plane(nf, island):
    """The island centre's crossing of q1 = 0 upwards (by hand: phi2 = 2 phi1 - psi_c)."""
    phi1 = np.linspace(-np.pi, np.pi, 4001)
    phi = np.stack([phi1, 2 * phi1 - island.center_angle], axis=1)
    z = nf.from_normal(np.tile(island.center_actions, (len(phi1), 1)), phi)
    i = int(np.argmax((z[:-1, 0] < 0) & (z[1:, 0] >= 0)))
    w = z[i, 0] / (z[i, 0] - z[i + 1, 0])
    return (1 - w) * z[i] + w * z[i + 1]


def test_curve_arguments():
    nf = phaselab.normal_form(two_modes(), [0, 0, 0, 0], 4)
    with pytest.raises(ParameterError, match="coordinate"):
        nf.invariant_curve([0.01, 0.01], {"p1": 0.0})
    with pytest.raises(ParameterError, match="actions"):
        nf.invariant_curve([0.01], {"q1": 0.0})
    pend = phaselab.Hamiltonian("p**2/2 - cos(q)", ["q"], ["p"])
    with pytest.raises(ModelError, match="two degrees of freedom"):
        phaselab.normal_form(pend, [0, 0], 4).invariant_curve([0.1, 0.1], {"q": 0.0})
