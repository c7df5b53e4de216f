"""Families of periodic orbits: every member on its own energy shell and closing under an
independent scipy integration, the span's end reached and not passed, and bifurcations of
any number of degrees of freedom from Broucke's stability indices, checked against
monodromy matrices from scipy's variational equations."""

import numpy as np
import pytest
from scipy.integrate import solve_ivp
from scipy.linalg import expm

import phaselab
from phaselab.structures import multipliers
from phaselab.errors import ParameterError

from rtbp_reference import MU, lyapunov_guess, rtbp_field, scipy_monodromy


@pytest.fixture(scope="module")
def planar_family():
    H = phaselab.models.restricted_three_body()
    z, direction = lyapunov_guess(2)
    o = phaselab.periodic_orbit(H, z, plane={"y": 0.0}, params={"mu": MU}, direction=direction)
    return H, o, phaselab.continue_family(o, "energy", (o.energy, o.energy + 0.01), steps=60)


@pytest.fixture(scope="module")
def spatial_family():
    H = phaselab.models.spatial_restricted_three_body()
    z, direction = lyapunov_guess(3)
    o = phaselab.periodic_orbit(H, z, plane={"y": 0.0}, params={"mu": MU}, direction=direction)
    return H, o, phaselab.continue_family(o, "energy", (o.energy, -1.574), steps=60)


# ----------------------------------------------------------------------------- members' states
def test_energy_family_members_lie_on_their_own_shells_and_close(planar_family):
    """Every exported member of an L2 Lyapunov family, continued in the energy, lies on its
    own energy shell to the Newton tolerance, and returns to itself after its period under
    an independent scipy DOP853 integration of the hand-written equations of motion."""
    H, _, fam = planar_family
    ds = fam.to_xarray()
    states, energies = ds["state"].values, ds["energy"].values
    assert len(fam) > 10 and fam.complete
    np.testing.assert_allclose(H.energy(states, params={"mu": MU}), energies, rtol=0, atol=1e-10)
    np.testing.assert_allclose(fam.states, states)
    for i in range(0, len(fam), 4):
        sol = solve_ivp(lambda t, z: rtbp_field(z), (0.0, fam.period[i]), states[i], method="DOP853",
                        rtol=1e-13, atol=1e-13)
        assert np.max(np.abs(sol.y[:, -1] - states[i])) < 1e-8, i
        assert fam.orbit(i).state == pytest.approx(states[i], abs=1e-12)


def test_parameter_family_on_a_plane_keeps_each_members_shell():
    """Continued in a model parameter at a fixed energy on a section plane (the parameter
    enters the solved momentum there), each member's state lies on H(state; its own w) = E
    and closes under scipy DOP853 over its period (before the fix: 2.6e-4 off its shell)."""
    H = phaselab.Hamiltonian("(px**2+py**2)/2 + (x**2 + w*y**2)/2 + 0.5*x**2*y", ["x", "y"],
                             ["px", "py"], params={"w": 2.25})
    E = 0.05
    o = phaselab.periodic_orbit(H, [0.0, 0.1, 0.3, 0.0], plane={"x": 0.0}, energy=E, method="yoshida8",
                                dt=0.01)
    fam = phaselab.continue_family(o, "w", (2.25, 3.0), steps=40)
    assert fam.complete and fam.values[-1] == 3.0 and len(fam) > 5
    for w, z, T in zip(fam.values, fam.states, fam.period):
        assert H.energy(z[None], params={"w": w})[0] == pytest.approx(E, abs=1e-10)

        def field(t, s, w=w):
            x, y, px, py = s
            return [px, py, -x - x * y, -w * y - 0.5 * x ** 2]

        sol = solve_ivp(field, (0.0, T), z, method="DOP853", rtol=1e-12, atol=1e-12)
        assert np.max(np.abs(sol.y[:, -1] - z)) < 1e-8


# ----------------------------------------------------------------------------- the span
@pytest.mark.parametrize("span", [(0.5, 5.0), (0.5, 3.0)])
def test_continuation_lands_on_the_end_of_its_span(standard_map, span):
    """The last member sits at the span's end (common practice: the step is cut to land
    on it), and its residue is the closed form K/4 of the fixed point (pi, 0) there."""
    o = phaselab.periodic_orbit(standard_map, [3.1, 0.01], params={"K": 0.5})
    fam = phaselab.continue_family(o, "K", span)
    assert fam.complete and fam.values[-1] == span[1] and fam.values.max() == span[1]
    assert fam.residue[-1] == pytest.approx(span[1] / 4, abs=1e-9)


def test_energy_family_ends_at_its_span(planar_family):
    _, o, fam = planar_family
    assert fam.values[0] == o.energy and fam.values[-1] == o.energy + 0.01
    assert np.all(np.diff(fam.values) > 0)


def test_a_family_that_stops_early_says_why(standard_map):
    o = phaselab.periodic_orbit(standard_map, [3.1, 0.01], params={"K": 0.5})
    fam = phaselab.continue_family(o, "K", (0.5, 5.0), steps=3)
    assert not fam.complete and "step budget" in fam.note and fam.values[-1] < 5.0
    with pytest.raises(ParameterError, match="resonances"):
        phaselab.continue_family(o, "K", (0.5, 5.0), resonances=2)


# ----------------------------------------------------------------------------- bifurcations
def test_vertical_bifurcation_of_planar_lyapunov_orbits(spatial_family):
    """The planar L2 Lyapunov family of the spatial problem (a 4-D section map) meets the
    vertical bifurcation where the halo family is born: the pair in (z, pz) passes +1.
    Both members beside it are checked against monodromy matrices from scipy's variational
    equations: there the (z, pz) block decouples, so its trace is the vertical index, the
    in-plane 4 x 4 block has trace 2 + the planar index (its trivial pair is at +1), and
    the sum of the section map's indices is tr Phi - 2 (the 6 x 6 monodromy's trivial pair
    of the flow direction and the energy)."""
    H, o, fam = spatial_family
    assert fam.complete and fam.stability_indices.shape == (len(fam), 2)
    assert np.isnan(fam.residue).all()
    flagged = [b for b in fam.bifurcations if b["kind"] == "tangent (multiplier +1)"]
    assert len(flagged) == 1
    b = flagged[0]
    assert set(b["coordinates"]) == {"z", "pz"}
    i, j = b["between"]
    assert fam.values[i] < b["parameter"] < fam.values[j]
    k = b["pair"]
    vertical = []
    for m in (i, j):
        z0 = fam.states[m]
        zT, phi = scipy_monodromy(z0, fam.period[m])
        assert np.max(np.abs(zT - z0)) < 1e-8                 # the member closes
        planar = [0, 1, 3, 4]
        b_vertical = np.trace(phi[np.ix_([2, 5], [2, 5])])
        b_planar = np.trace(phi[np.ix_(planar, planar)]) - 2.0
        got = fam.stability_indices[m]
        assert got[k].real == pytest.approx(b_vertical, abs=1e-6)
        assert got[1 - k].real == pytest.approx(b_planar, rel=1e-6)
        assert np.sum(got).real == pytest.approx(np.trace(phi) - 2.0, rel=1e-6)
        orbit = fam.orbit(m)                                   # the PeriodicOrbit agrees
        np.testing.assert_allclose(np.sort(orbit.stability_indices.real), np.sort(got.real), rtol=1e-8)
        vertical.append(b_vertical - 2.0)
    assert vertical[0] * vertical[1] < 0                       # scipy too sees +1 passed there


def test_two_dimensional_indices_are_the_trace(standard_map):
    """For a 2-D map the index is tr M = 2 - 4 R (Greene 1979) and the period doubling of
    the fixed point (pi, 0) at K = 4 (R = K/4) is flagged on that pair."""
    o = phaselab.periodic_orbit(standard_map, [3.1, 0.01], params={"K": 0.5})
    assert o.stability_indices[0].real == pytest.approx(2 - 4 * o.residue, abs=1e-12)
    fam = phaselab.continue_family(o, "K", (0.5, 5.0), resonances=6)
    np.testing.assert_allclose(fam.stability_indices[:, 0].real, 2 - 4 * fam.residue, atol=1e-12)
    kinds = {b["kind"]: b["parameter"] for b in fam.bifurcations}
    assert kinds["period doubling (multiplier -1)"] == pytest.approx(4.0, abs=1e-9)
    # b = 2 - K at (pi, 0) (the closed form above) equals 2 cos(2 pi p/q) at K = 2 - 2 cos(2 pi p/q)
    for p, q in ((1, 3), (1, 4), (1, 5), (2, 5), (1, 6)):
        want = 2 - 2 * np.cos(2 * np.pi * p / q)
        assert kinds[f"resonance {p}/{q} (multipliers exp(+-2 pi i {p}/{q}))"] == pytest.approx(want, abs=1e-9)


def _coupled_oscillators(omega2, eps=0.05, T=1.0):
    """Monodromy over T of H = (x1^2 + p1^2)/2 - omega2 (x2^2 + p2^2)/2 + eps x1 x2: two
    modes of opposite Krein signature, whose pairs collide on the unit circle near
    omega2 = 1 and leave it (common practice; the matrix from scipy's expm)."""
    S = np.array([[1.0, eps, 0, 0], [eps, -omega2, 0, 0], [0, 0, 1.0, 0], [0, 0, 0, -omega2]])
    J = np.block([[np.zeros((2, 2)), np.eye(2)], [-np.eye(2), np.zeros((2, 2))]])
    return expm(J @ S * T)


def test_indices_of_a_symplectic_matrix_and_a_krein_collision():
    """Indices against numpy's eigenvalues of exp(J S), and a Krein collision flagged where
    numpy's multipliers leave the unit circle (and where they come back)."""
    rng = np.random.default_rng(7)
    A = rng.normal(size=(6, 6))
    S = A + A.T
    J = np.block([[np.zeros((3, 3)), np.eye(3)], [-np.eye(3), np.zeros((3, 3))]])
    M = expm(J @ S * 0.3)
    pairs = multipliers.multiplier_pairs(M)
    assert np.sum(pairs.indices) == pytest.approx(np.trace(M), rel=1e-10)
    lam = np.linalg.eigvals(M)
    for b, (l1, l2) in zip(pairs.indices, pairs.multipliers):
        assert l1 * l2 == pytest.approx(1.0, abs=1e-8)
        assert b == pytest.approx(l1 + 1 / l1, abs=1e-10)
        assert np.min(np.abs(lam - l1)) < 1e-10 and np.min(np.abs(lam - l2)) < 1e-10

    values = np.linspace(0.8, 1.2, 41)
    mons = [_coupled_oscillators(w) for w in values]
    off = [np.max(np.abs(np.linalg.eigvals(M))) > 1 + 1e-9 for M in mons]
    rows = []
    for M in mons:
        p = multipliers.multiplier_pairs(M)
        rows.append(p if not rows else p.take(multipliers.track(rows[-1].indices, p.indices)))
    B = np.array([r.indices for r in rows])
    names = [multipliers.dominant(r.weights, ["x1", "x2", "p1", "p2"]) for r in rows]
    found = multipliers.crossings(values, B, names)
    leave = [b for b in found if b["kind"].startswith("Krein collision")]
    back = [b for b in found if b["kind"] == "two pairs return to the unit circle"]
    first_off, last_off = off.index(True), len(off) - 1 - off[::-1].index(True)
    assert len(leave) == 1 and leave[0]["between"] == (first_off - 1, first_off)
    assert len(back) == 1 and back[0]["between"] == (last_off, last_off + 1)
    assert leave[0]["pairs"] in ((0, 1), (1, 0))


def test_a_spatial_family_draws_its_indices_and_saves(spatial_family, tmp_path):
    """The stability diagram of a 4-D section map shows the indices (the residue is not
    defined); the data file carries them and the bifurcation with its pair."""
    import json

    import xarray as xr

    _, _, fam = spatial_family
    fig = fam.plot()
    assert fig.axes[0].get_yscale() == "symlog" and "stability index" in fig.axes[0].get_ylabel()
    out = fam.save(tmp_path / "family.nc")
    with xr.open_dataset(out) as ds:
        np.testing.assert_allclose(ds["stability_index_real"].values, fam.stability_indices.real)
        bif = json.loads(ds.attrs["bifurcations"])
    assert [b["kind"] for b in bif] == ["tangent (multiplier +1)"]
    summary = json.loads(fam.save(tmp_path / "family.json").read_text())
    assert summary["bifurcations"][0]["pair"] == fam.bifurcations[0]["pair"]
    assert fam.save(tmp_path / "family.png").stat().st_size > 1000
