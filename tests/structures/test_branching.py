"""Branch switching at a flagged bifurcation: the period-2 family of the standard map born at
its period doubling against a closed form, and the spatial family born at the vertical
bifurcation of the planar L2 Lyapunov family of the spatial restricted three-body problem,
every member closing under scipy's DOP853 and on its own energy shell."""

import numpy as np
import pytest
import sympy as sp
from scipy.integrate import solve_ivp
from scipy.optimize import brentq

import phaselab
from phaselab.errors import ParameterError

from rtbp_reference import MU, lyapunov_guess, rtbp_field


# ----------------------------------------------------------------------------- a 2-D map
@pytest.fixture(scope="module")
def doubling(standard_map):
    """The fixed point (pi, 0) of the standard map continued in K across K = 4, and the
    period-2 family started at its period doubling."""
    o = phaselab.periodic_orbit(standard_map, [3.1, 0.01], params={"K": 3.0})
    fam = phaselab.continue_family(o, "K", (3.0, 4.5), steps=40)
    flags = [b for b in fam.bifurcations if b["kind"] == "period doubling (multiplier -1)"]
    return fam, flags, phaselab.branch_family(fam, flags[0], (3.0, 6.0), steps=30)


def period_two_amplitude(K):
    """The period-2 orbit (pi + a, 2a) -> (pi - a, -2a) of the standard map p' = p + K sin q,
    q' = q + p' (derivation, not from a source: from (pi + a, p1) the map gives p2 = p1 - K sin a
    and q2 = pi + a + p2 = pi - a, so p2 = -2a; from (pi - a, p2), p1 = p2 + K sin a and
    q1 = pi - a + p1 = pi + a, so p1 = 2a; together K sin a = 4a, a real solution a > 0 for
    K > 4). Its root by scipy's brentq."""
    return brentq(lambda a: K * np.sin(a) - 4.0 * a, 1e-12, np.pi)


def test_period_doubling_of_the_standard_map_gives_the_closed_form_period_two_orbits(doubling):
    """At (pi, 0) the Jacobian [[1 - K, 1], [-K, 1]] has trace 2 - K (derivation): the
    multiplier -1 at K = 4, with eigenvector (1, 2), along which the new family leaves.
    Every member of the new family is the closed-form period-2 orbit at its own K."""
    fam, flags, new = doubling
    assert len(flags) == 1 and flags[0]["parameter"] == pytest.approx(4.0, abs=1e-9)
    assert new.complete and len(new) > 10 and new.first.crossings == 2
    assert 4.0 < new.values[0] < 4.0001 and new.values[-1] == 6.0
    assert np.all(np.diff(new.values) > 0)
    two_pi = 2 * np.pi
    for K, z in zip(new.values, new.states):
        a = period_two_amplitude(K)
        # near the bifurcation the orbit moves like sqrt(K - 4) with K: a looser match there
        atol = 1e-6 if K < 4.01 else 1e-9
        np.testing.assert_allclose(z, [np.pi + a, 2 * a], atol=atol)
    for i in (0, len(new) // 2, len(new) - 1):
        orbit = new.orbit(i)
        a = period_two_amplitude(new.values[i])
        second = orbit.points[1]
        assert second[0] == pytest.approx(np.pi - a, abs=1e-8)
        assert second[1] == pytest.approx(two_pi - 2 * a, abs=1e-8)       # p = -2a, wrapped into [0, 2 pi)
    # the period-2 orbit is stable just past the doubling (common practice: the supercritical
    # doubling of an area-preserving map hands the stability to the doubled orbit)
    assert new.stability[1] == "stable"


def test_the_other_side_of_the_doubling_is_the_same_orbit_from_its_other_point(doubling, standard_map):
    """Leaving along -(1, 2) starts at (pi - a, -2a), the other point of the same period-2
    orbit (derivation as above)."""
    fam, flags, _ = doubling
    new = phaselab.branch_family(fam, flags[0], (3.0, 4.2), side=-1, steps=10)
    K, z = new.values[-1], new.states[-1]
    a = period_two_amplitude(K)
    np.testing.assert_allclose(z, [np.pi - a, 2 * np.pi - 2 * a], atol=1e-9)


@pytest.mark.parametrize("side", [1, -1])
def test_pitchfork_of_a_cubic_kick_map_gives_the_closed_form_fixed_points(side):
    """The map p' = p - a q - q^3, q' = q + p' (a kick then a drift, area-preserving) has the
    fixed point (0, 0) with trace 2 - a (derivation: Jacobian [[1 - a - 3q^2, 1],
    [-a - 3q^2, 1]] in (q, p)), whose multiplier passes +1 at a = 0 with eigenvector (1, 0);
    for a < 0 the fixed points (+-sqrt(-a), 0) (p' = p and q' = q need p' = 0 and
    a q + q^3 = 0) branch off, stable with trace 2 + 2a (derivation)."""
    q, p, a = sp.symbols("q p a", real=True)
    kick = phaselab.AreaPreservingMap([(p, p - a * q - q ** 3), (q, q + p)], [q], [p], params={a: 0.5},
                                      name="cubic_kick")
    o = phaselab.periodic_orbit(kick, [0.01, 0.0], params={"a": 0.5})
    fam = phaselab.continue_family(o, "a", (-0.5, 0.5), steps=40)
    (flag,) = [b for b in fam.bifurcations if b["kind"] == "tangent (multiplier +1)"]
    assert flag["parameter"] == pytest.approx(0.0, abs=1e-12)
    new = phaselab.branch_family(fam, flag, (-0.5, 0.5), side=side, steps=30)
    assert new.complete and new.values[-1] == -0.5 and np.all(np.diff(new.values) < 0)
    for A, z, b in zip(new.values, new.states, new.stability_indices[:, 0].real):
        atol = 1e-6 if A > -1e-3 else 1e-9      # the branch moves like sqrt(-a) near a = 0
        np.testing.assert_allclose(z, [side * np.sqrt(-A), 0.0], atol=atol)
        assert b == pytest.approx(2 + 2 * A, abs=1e-6)


def test_bad_arguments_are_refused(doubling, standard_map):
    fam, flags, _ = doubling
    with pytest.raises(ParameterError, match="Family"):
        phaselab.branch_family(None, 0, (3.0, 6.0))
    with pytest.raises(ParameterError, match="position"):
        phaselab.branch_family(fam, 5, (3.0, 6.0))
    with pytest.raises(ParameterError, match="bifurcations"):
        phaselab.branch_family(fam, {"kind": "period doubling (multiplier -1)"}, (3.0, 6.0))
    with pytest.raises(ParameterError, match="side"):
        phaselab.branch_family(fam, 0, (3.0, 6.0), side=0)
    with pytest.raises(ParameterError, match="span"):
        phaselab.branch_family(fam, 0, (4.5, 6.0))
    with pytest.raises(ParameterError, match="offset"):
        phaselab.branch_family(fam, 0, (3.0, 6.0), offset=-1.0)
    folded = dict(flags[0], kind="fold")
    fam.bifurcations.append(folded)
    try:
        with pytest.raises(ParameterError, match="passes \\+1 or -1"):
            phaselab.branch_family(fam, folded, (3.0, 6.0))
    finally:
        fam.bifurcations.remove(folded)


# ----------------------------------------------------------------------------- the spatial problem
@pytest.fixture(scope="module")
def spatial_branch():
    H = phaselab.models.spatial_restricted_three_body()
    z, direction = lyapunov_guess(3)
    o = phaselab.periodic_orbit(H, z, plane={"y": 0.0}, params={"mu": MU}, direction=direction)
    fam = phaselab.continue_family(o, "energy", (o.energy, -1.574), steps=60)
    flag = [b for b in fam.bifurcations if b["kind"] == "tangent (multiplier +1)"][0]
    return H, fam, flag, phaselab.branch_family(fam, flag, (-1.58, -1.574), steps=12, ds_max=0.01)


@pytest.mark.slow
def test_spatial_family_born_at_the_vertical_bifurcation_closes_on_its_own_shells(spatial_branch):
    """The family born at the vertical bifurcation of the planar L2 Lyapunov family leaves
    the plane z = pz = 0: the out-of-plane amplitude grows from 0 along it, each member lies
    on its own energy shell and returns to itself after its period under scipy's DOP853
    (closure below 1e-9, issue 22) of the hand-written equations of motion."""
    H, fam, flag, new = spatial_branch
    assert set(flag["coordinates"]) == {"z", "pz"}
    assert new.complete and len(new) >= 5 and new.values[-1] == -1.574
    assert flag["parameter"] < new.values[0] < flag["parameter"] + 1e-4     # next to the bifurcation
    np.testing.assert_allclose(H.energy(new.states, params={"mu": MU}), new.values, rtol=0, atol=1e-10)
    heights = []
    for i in range(len(new)):
        z0, T = new.states[i], new.period[i]
        sol = solve_ivp(lambda t, s: rtbp_field(s), (0.0, T), z0, method="DOP853", rtol=1e-13, atol=1e-13)
        assert np.max(np.abs(sol.y[:, -1] - z0)) < 1e-9, i
        heights.append(np.max(np.abs(sol.y[2])))
    heights = np.array(heights)
    assert heights[0] < 0.005 and np.all(np.diff(heights) > 0) and heights[-1] > 0.02
    # the planar family's members have no height at all (the plane is invariant)
    assert np.max(np.abs(fam.states[:, [2, 5]])) < 1e-15


@pytest.mark.slow
def test_the_other_side_of_the_vertical_bifurcation_is_the_mirror_family(spatial_branch):
    """side=-1 leaves to z < 0: by the symmetry z -> -z, pz -> -pz of H (common practice:
    the restricted problem is symmetric about the primaries' plane) its first member is the
    mirror image of the first member on the z > 0 side."""
    H, fam, flag, new = spatial_branch
    below = phaselab.branch_family(fam, flag, (-1.58, -1.5755), side=-1, steps=2, ds_max=0.01)
    mirror = new.states[0] * np.array([1, 1, -1, 1, 1, -1])
    assert below.values[0] == pytest.approx(new.values[0], abs=1e-10)
    np.testing.assert_allclose(below.states[0], mirror, atol=1e-8)
    assert below.states[-1][2] < 0
