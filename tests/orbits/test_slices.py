"""Four-dimensional sections: coloured projections, 3-D phase-space slices, projection grids.

The test system is integrable with three uncoupled oscillators of incommensurate
frequencies,

    H = sum_i (p_i^2 + w_i^2 q_i^2) / 2,   w = (1, sqrt 2, sqrt 3),

sectioned at q3 = 0 with p3 > 0. Each oscillator's energy E_i = (p_i^2 + w_i^2 q_i^2)/2 is
conserved: along the flow q_i' = p_i and p_i' = -w_i^2 q_i, so
dE_i/dt = p_i p_i' + w_i^2 q_i q_i' = -w_i^2 p_i q_i + w_i^2 q_i p_i = 0 (derived here). On the
section (q3 = 0, p3 = +sqrt(2 E3) fixed) an orbit's points therefore lie on the 2-torus
{E1 = const} x {E2 = const} in (q1, q2, p1, p2). Successive crossings are one period
2 pi / w3 apart, so oscillator i's phase, atan2(w_i q_i, p_i), advances by 2 pi w_i / w3 per
crossing (the exact solution q_i = A_i sin(w_i t + phi_i), derived here).
"""

import numpy as np
import pytest

import phaselab
from phaselab.errors import ParameterError
from phaselab.orbits.slices import section_coordinates

W = np.array([1.0, np.sqrt(2.0), np.sqrt(3.0)])
N_CROSS = 120


@pytest.fixture(scope="module")
def oscillators():
    H = phaselab.Hamiltonian("(p1**2 + p2**2 + p3**2)/2 + (w1**2*q1**2 + w2**2*q2**2 + w3**2*q3**2)/2",
                             coords=["q1", "q2", "q3"], momenta=["p1", "p2", "p3"],
                             params={"w1": W[0], "w2": W[1], "w3": W[2]}, name="three oscillators")
    seeds = np.array([[0.5, 0.3, 0.0, 0.2, 0.4, 1.0],
                      [0.1, -0.6, 0.0, 0.7, 0.1, 0.8],
                      [-0.4, 0.2, 0.0, -0.3, -0.5, 1.1],
                      [0.8, 0.05, 0.0, 0.0, 0.6, 0.6]])
    sec = phaselab.section(H, seeds, plane={"q3": 0.0}, direction=+1, crossings=N_CROSS, dt=0.01)
    return H, seeds, sec


def _energies(states):
    q, p = states[..., :3], states[..., 3:]
    return (p**2 + W**2 * q**2) / 2


def test_section_coordinates_leave_out_the_plane_and_its_conjugate(oscillators):
    _, _, sec = oscillators
    assert section_coordinates(sec) == ("q1", "q2", "p1", "p2")


def test_points_lie_on_each_orbits_torus(oscillators):
    _, seeds, sec = oscillators
    assert np.all(sec.counts == N_CROSS)
    E0 = _energies(seeds)
    grid = phaselab.projection_grid(sec)
    assert grid.axes == ("q1", "q2", "p1", "p2") and grid.n_points == 4 * N_CROSS
    q1, q2, p1, p2 = grid.points.T
    E1 = (p1**2 + W[0]**2 * q1**2) / 2
    E2 = (p2**2 + W[1]**2 * q2**2) / 2
    # exact invariants E1, E2 of the seed (derived in the module docstring); the Yoshida 4
    # step at dt = 0.01 keeps each to about 1e-9 (common practice: O(dt^4) energy error)
    np.testing.assert_allclose(E1, E0[grid.orbit, 0], rtol=1e-7, atol=1e-10)
    np.testing.assert_allclose(E2, E0[grid.orbit, 1], rtol=1e-7, atol=1e-10)
    # every point is on the plane, crossing upwards with p3 = sqrt(2 E3)
    full = sec.points[:, :N_CROSS]
    np.testing.assert_allclose(full[..., 2], 0.0, atol=1e-12)
    np.testing.assert_allclose(full[..., 5], np.broadcast_to(np.sqrt(2 * E0[:, 2])[:, None], (4, N_CROSS)),
                               rtol=1e-7)


def test_phases_advance_by_the_frequency_ratio(oscillators):
    _, _, sec = oscillators
    pts = sec.points[:, :N_CROSS]
    for i in (0, 1):
        phase = np.unwrap(np.arctan2(W[i] * pts[..., i], pts[..., 3 + i]), axis=1)
        step = np.diff(phase, axis=1)
        # exact solution: 2 pi w_i / w3 per crossing, modulo 2 pi (module docstring)
        expected = np.angle(np.exp(2j * np.pi * W[i] / W[2]))
        np.testing.assert_allclose(np.angle(np.exp(1j * (step - expected))), 0.0, atol=1e-6)


def test_slab_selects_exactly_the_numpy_selection(oscillators):
    _, seeds, sec = oscillators
    w0, eps = 0.1, 0.05
    sl = phaselab.section_slice(sec, "q2", w0, eps)
    assert sl.kind == "slice" and sl.axes == ("q1", "p1", "p2")
    # the same selection by hand with numpy over the raw section array
    pts = sec.points[:, :N_CROSS].reshape(-1, 6)
    orbit = np.repeat(np.arange(sec.n_orbits), N_CROSS)
    mask = np.abs(pts[:, 1] - w0) < eps
    assert sl.n_points == int(mask.sum()) > 10
    np.testing.assert_array_equal(sl.points, pts[mask][:, [0, 3, 4]])
    np.testing.assert_array_equal(sl.orbit, orbit[mask])
    np.testing.assert_array_equal(sl.crossing, np.tile(np.arange(N_CROSS), sec.n_orbits)[mask])
    # in the slice the torus shows as two curves p2 = +-sqrt(2 E2 - w2^2 q2^2): with
    # |q2 - w0| < eps, |p2^2 - (2 E2 - w2^2 w0^2)| <= w2^2 eps (2|w0| + eps) (derived here)
    E2 = _energies(seeds)[sl.orbit, 1]
    gap = np.abs(sl.column("p2") ** 2 - (2 * E2 - W[1] ** 2 * w0**2))
    assert np.all(gap <= W[1] ** 2 * eps * (2 * abs(w0) + eps) + 1e-8)


def test_coloured_projection(oscillators):
    _, _, sec = oscillators
    pr = phaselab.section_projection(sec, ("q1", "p1"), color="q2")
    assert pr.kind == "projection" and pr.color == "q2"
    flat = sec.points[:, :N_CROSS].reshape(-1, 6)
    np.testing.assert_array_equal(pr.color_values, flat[:, 1])
    np.testing.assert_array_equal(pr.points, flat[:, [0, 3]])
    default = phaselab.section_projection(sec, ("q1", "p1"))
    assert default.color == "q2"


@pytest.mark.parametrize("call, match", [
    (lambda s: phaselab.section_slice(s, "q3", 0.0, 0.1), "not a coordinate of this section"),
    (lambda s: phaselab.section_slice(s, "q2", 0.0, 0.0), "half_width must be positive"),
    (lambda s: phaselab.section_slice(s, "q2", float("nan"), 0.1), "center must be finite"),
    (lambda s: phaselab.section_slice(s, "q2", 0.0, 0.1, axes=("q2", "p1")), "cannot also be shown"),
    (lambda s: phaselab.section_projection(s, ("q1", "q1")), "twice"),
    (lambda s: phaselab.section_projection(s, ("q1",)), "two or three"),
    (lambda s: phaselab.section_projection(s, ("q1", "p1"), color="q1"), "already one of the shown"),
])
def test_bad_requests_are_refused(oscillators, call, match):
    with pytest.raises(ParameterError, match=match):
        call(oscillators[2])


def test_figures_and_data_files(oscillators, tmp_path):
    xr = pytest.importorskip("xarray")
    _, _, sec = oscillators
    sl = phaselab.section_slice(sec, "q2", 0.1, 0.05)
    fig = sl.plot()
    assert fig.axes[0].name == "3d"
    out = sl.save(tmp_path / "slice.png")
    assert out.stat().st_size > 1000
    phaselab.projection_grid(sec).save(tmp_path / "grid.svg")
    phaselab.section_projection(sec, ("q1", "p1")).save(tmp_path / "proj.pdf")
    sl.save(tmp_path / "slice.nc")
    ds = xr.open_dataset(tmp_path / "slice.nc")
    np.testing.assert_array_equal(ds["p2"].values, sl.column("p2"))
    assert ds.attrs["kind"] == "slice" and "q2" in ds.attrs["slab"] and "note" in ds.attrs
    assert ds.attrs["system"] == "three oscillators"
    ds.close()
    assert sorted(p.name for p in tmp_path.iterdir()) == ["grid.svg", "proj.pdf", "slice.nc", "slice.png"]
    with pytest.raises(ParameterError, match="cannot save"):
        sl.save(tmp_path / "slice.txt")


def test_slices_of_a_four_dimensional_map():
    """The iterates of a 4-D map are 4-D section points: every component is a section
    coordinate. Two uncoupled rotations (q_i, p_i) -> rotation by 2 pi nu_i, composed from
    linear elements, keep each q_i^2 + p_i^2 (common practice: rotations preserve radius),
    so a slab in p2 shows circles of radius r1 in (q1, p1)."""
    nu1, nu2 = 0.1234, 0.3071
    c1, s1, c2, s2 = np.cos(2 * np.pi * nu1), np.sin(2 * np.pi * nu1), np.cos(2 * np.pi * nu2), np.sin(2 * np.pi * nu2)
    R = [[c1, 0, s1, 0], [0, c2, 0, s2], [-s1, 0, c1, 0], [0, -s2, 0, c2]]
    m = phaselab.compose_map([phaselab.LinearElement(R)], ["q1", "q2"], ["p1", "p2"], name="two rotations")
    seeds = np.array([[0.5, 0.2, 0.0, 0.1], [0.2, 0.6, 0.1, 0.0]])
    sec = phaselab.section(m, seeds, crossings=400)
    assert section_coordinates(sec) == ("q1", "q2", "p1", "p2")
    sl = phaselab.section_slice(sec, "p2", 0.0, 0.02)
    flat = sec.points.reshape(-1, 4)
    mask = np.abs(flat[:, 3]) < 0.02
    np.testing.assert_array_equal(sl.points, flat[mask][:, :3])
    r1 = np.hypot(seeds[:, 0], seeds[:, 2])
    np.testing.assert_allclose(np.hypot(sl.column("q1"), sl.column("p1")), r1[sl.orbit], rtol=1e-12)
    empty = phaselab.section_slice(sec, "p2", 5.0, 0.01)
    assert empty.n_points == 0 and empty.plot() is not None
