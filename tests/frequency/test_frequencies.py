"""Frequency analysis: Laskar's method, tunes, rotation numbers, frequency maps, pictures.

Outside references are named beside every numeric check.
"""

import math
import os

import numpy as np
import pytest
from scipy.special import ellipk

import phaselab
from phaselab.frequency.frequencies import STATUS_TEXT, birkhoff_weights, frequencies, rotation_number
from phaselab.frequency.spectral import leading_lines
from phaselab.errors import ParameterError, PhaselabError


# ----------------------------------------------------------------------------- systems
@pytest.fixture(scope="module")
def oscillator():
    """One compiled system serves the pendulum (s = 1, the rest 0) and the weakly
    anharmonic oscillator (s = 0): parameters never recompile."""
    return phaselab.Hamiltonian("p**2/2 + s*(1 - cos(x)) + w0**2*x**2/2 + a*x**3/3 + b*x**4/4",
                                ["x"], ["p"], params={"s": 1.0, "w0": 0.0, "a": 0.0, "b": 0.0})


@pytest.fixture(scope="module")
def kicked_rotation():
    """One turn: rotation by 2 pi Q in (x, p), then the kick p -> p - c x^3."""
    return phaselab.AreaPreservingMap(
        ["x*cos(2*pi*Q) + p*sin(2*pi*Q)",
         "-x*sin(2*pi*Q) + p*cos(2*pi*Q) - c*(x*cos(2*pi*Q) + p*sin(2*pi*Q))**3"],
        ["x"], ["p"], params={"Q": 0.1813, "c": 1.0}, name="kicked rotation")


@pytest.fixture(scope="module")
def rotor():
    return phaselab.models.standard_map()


@pytest.fixture(scope="module")
def pair():
    """Two harmonic oscillators (isochronous); its sections serve two tests."""
    return phaselab.Hamiltonian("(px**2 + py**2)/2 + (w1**2*x**2 + w2**2*y**2)/2", ["x", "y"],
                                ["px", "py"], params={"w1": 1.0, "w2": math.sqrt(2)})


# ----------------------------------------------------------------------------- the method
def _envelope_slope(lengths, errors, bands=8):
    """Slope of log(error) against log(length) through the largest error of each of
    ``bands`` equal log-width bands: the error oscillates with the length, so single
    points are never compared."""
    edges = np.geomspace(lengths.min(), lengths.max() * 1.0001, bands + 1)
    xs, ys = [], []
    for lo, hi in zip(edges[:-1], edges[1:]):
        sel = (lengths >= lo) & (lengths < hi)
        k = np.argmax(errors[sel])
        xs.append(lengths[sel][k])
        ys.append(errors[sel][k])
    return np.polyfit(np.log(xs), np.log(ys), 1)[0]


def test_error_falls_like_T_minus_2_without_and_T_minus_4_with_the_hann_window():
    """Laskar 1993 (Physica D 67, 257): for a quasi-periodic signal the error of the
    leading frequency falls like T^-(2p+2) with a window of order p: T^-2 without a window,
    T^-4 with the Hann window. Two lines, 0.05 cycles per sample apart, half the size."""
    nu1 = 0.1234567890123
    lengths = np.unique(np.round(np.geomspace(200, 3200, 56)).astype(int))
    slopes = {}
    for p in (0, 1):
        errors = []
        for n in lengths:
            k = np.arange(n)
            x = np.exp(2j * np.pi * nu1 * k) + 0.5 * np.exp(2j * np.pi * (nu1 + 0.05) * k + 0.7j)
            errors.append(abs(leading_lines(x, 1, window_order=p).nu[0, 0] - nu1))
        slopes[p] = _envelope_slope(lengths.astype(float), np.array(errors))
    assert slopes[0] == pytest.approx(-2.0, abs=0.35)
    assert slopes[1] == pytest.approx(-4.0, abs=0.5)


def test_lines_of_a_clean_quasi_periodic_signal():
    """A sum of three complex lines with known frequencies, amplitudes and phases (the
    construction is the reference, common practice): 4096 samples give the leading
    frequency to better than 1e-12 cycles per sample, and all lines with their amplitudes and
    phases (the Gram-Schmidt step keeps amplitudes right)."""
    k = np.arange(4096)
    nus = np.array([0.1234567891234, -0.3141592653, 0.2718281828])
    amps = np.array([1.0, 0.5, 0.2])
    phases = np.array([0.3, 1.1, -0.4])
    x = sum(a * np.exp(1j * (2 * np.pi * f * k + ph)) for f, a, ph in zip(nus, amps, phases))
    found = leading_lines(np.vstack([x, 2 * x]), lines=3)
    assert abs(found.nu[0, 0] - nus[0]) < 1e-12
    np.testing.assert_allclose(found.nu[0], nus, atol=1e-11)
    np.testing.assert_allclose(found.amplitude[0], amps, rtol=1e-9)
    np.testing.assert_allclose(found.amplitude[1], 2 * amps, rtol=1e-9)
    np.testing.assert_allclose(found.phase[0], phases, atol=1e-8)


def test_weighted_birkhoff_weights():
    """Das, Sander, Yorke et al. 2017 (Nonlinearity 30, 4111): w(x) = exp(-1/(x(1-x))),
    normalised; the weighted average of cos(2 pi k alpha) along a rotation by an
    irrational alpha is 0 (Weyl equidistribution, common practice) to near rounding."""
    w = birkhoff_weights(1000)
    assert w.sum() == pytest.approx(1.0, abs=1e-15)
    assert w[0] == 0.0
    alpha = (math.sqrt(5) - 1) / 2
    assert abs(w @ np.cos(2 * np.pi * alpha * np.arange(1000))) < 1e-12


# ----------------------------------------------------------------------------- flows
def test_pendulum_libration_frequency(oscillator):
    """Abramowitz & Stegun 17.3 (complete elliptic integral, scipy.special.ellipk with
    m = k^2): the pendulum H = p^2/2 - cos x librating from rest at theta0 has angular
    frequency 2 pi / (4 K(k)), k = sin(theta0 / 2), i.e. nu = 1 / (4 K(k)) cycles per
    unit time. Relative error 1e-10 at three amplitudes (window order 2 keeps the
    analysis error far below the integrator's)."""
    theta0 = np.array([0.3, 1.5, 2.8])
    seeds = np.column_stack([theta0, np.zeros(3)])
    res = frequencies(oscillator, seeds, t=1000.0, samples=4096, dt=0.05, method="yoshida8",
                      window=2, params={"s": 1.0})
    expected = 1.0 / (4.0 * ellipk(np.sin(theta0 / 2) ** 2))
    np.testing.assert_allclose(res.nu[:, 0], expected, rtol=1e-10)
    assert res.unit == "cycles per unit time" and res.names == ("x",)
    assert np.all(res.status == 0) and np.all(res.valid)
    assert np.all(res.diffusion < -9)


def test_rotating_pendulum_turns_at_the_elliptic_rate(oscillator):
    """Derived with Abramowitz & Stegun 17.3 (scipy.special.ellipk): for
    H = p^2/2 + 1 - cos x started at x = 0 with p0 > 2, one turn takes
    T = int_0^2pi dx / sqrt(p0^2 - 4 sin^2(x/2)) = 4 K(m) / p0 with m = 4 / p0^2, so the
    angle turns at 1/T = p0 / (4 K(m)) cycles per unit time. Both the frequency of
    exp(i x) (x declared an angle) and the rotation number per unit time give it."""
    p0 = np.array([2.5, 4.0])
    seeds = np.column_stack([np.zeros(2), p0])
    expected = p0 / (4.0 * ellipk(4.0 / p0**2))
    freq = frequencies(oscillator, seeds, t=300.0, samples=4096, dt=0.02, method="yoshida8",
                       window=2, angles={"x": 2 * np.pi}, params={"s": 1.0})
    np.testing.assert_allclose(freq.nu[:, 0], expected, rtol=1e-10)
    rot = rotation_number(oscillator, seeds, t=300.0, samples=4096, dt=0.02, method="yoshida8",
                          params={"s": 1.0})
    assert rot.unit == "turns per unit time"
    np.testing.assert_allclose(rot.nu[:, 0], expected, rtol=1e-10)


def test_weakly_anharmonic_oscillator_frequency_shift(oscillator):
    """Landau & Lifshitz, Mechanics, sec. 28, eq. (28.13): x'' + w0^2 x = -a x^2 - b x^3
    oscillates at w = w0 + [3b/(8 w0) - 5a^2/(12 w0^3)] A^2 + O(A^4), A the amplitude of
    the fundamental harmonic. A is read from the amplitude of the leading line of the
    signal (equal to A up to O(A^2) relative, since p is scaled by rms(p)/rms(x) = w0 +
    O(A^2)). The relative error of the shift must be O(A^2): below 0.2 A^2 here, and it
    must shrink about fourfold when A halves."""
    w0, a, b = 1.3, 0.5, 1.0
    coefficient = 3 * b / (8 * w0) - 5 * a**2 / (12 * w0**3)
    x0 = np.array([0.01, 0.02, 0.04])
    res = frequencies(oscillator, np.column_stack([x0, 0 * x0]), t=600.0, samples=4096, dt=0.02,
                      method="yoshida8", window=2, params={"s": 0.0, "w0": w0, "a": a, "b": b})
    A = res.lines.amplitude[:, 0, 0]
    shift = 2 * np.pi * res.nu[:, 0] - w0
    rel = shift / (coefficient * A**2) - 1.0
    assert np.all(np.abs(rel) < 0.2 * A**2)
    assert 2.5 < rel[2] / rel[1] < 6.0 and 2.5 < rel[1] / rel[0] < 6.0


def test_section_tune_of_an_isochronous_pair(pair):
    """Derived: for H = (px^2 + py^2)/2 + (w1^2 x^2 + w2^2 y^2)/2 the plane x = 0 (upward)
    is crossed once per x period 2 pi / w1; y turns by w2 / w1 turns in between, so its
    tune per crossing is w2 / w1 folded into [-1/2, 1/2) (here sqrt(2) - 1). The x degree
    of freedom is fixed by the plane and not reported."""
    H = pair
    seeds = np.array([[0.0, 0.1, 0.5, 0.0], [0.0, -0.3, 0.2, 0.1]])
    res = frequencies(H, seeds, plane={"x": 0.0}, samples=256, dt=0.02, method="yoshida8")
    assert res.names == ("y",) and res.unit == "cycles per crossing"
    np.testing.assert_allclose(res.nu[:, 0], math.sqrt(2) - 1, atol=1e-11)
    pos = frequencies(H, seeds, plane={"x": 0.0}, samples=256, dt=0.02, method="yoshida8",
                      fold="positive")
    np.testing.assert_allclose(pos.nu[:, 0], math.sqrt(2) - 1, atol=1e-11)


def test_rotational_transform_of_a_field_line_flow():
    """Derived: field lines of H(th, psi; phi) = i0 psi + i1 psi^2/2 + eps psi cos(phi) (phi
    the toroidal angle, the time, period 2 pi) keep psi fixed and advance th by
    2 pi (i0 + i1 psi) per toroidal turn (the eps term integrates to zero over a turn), so
    the rotational transform is i0 + i1 psi exactly, sampled once per driving period."""
    F = phaselab.Hamiltonian("i0*psi + i1*psi**2/2 + eps*psi*cos(phi)", ["th"], ["psi"],
                             params={"i0": 0.31, "i1": 0.4, "eps": 0.05}, time="phi",
                             period="2*pi", name="model field")
    psi = np.linspace(0.1, 0.9, 5)
    res = rotation_number(F, np.column_stack([np.zeros(5), psi]), samples=64, dt=2 * np.pi / 64)
    assert res.sampling == "stroboscopic" and res.unit == "turns per driving period"
    np.testing.assert_allclose(res.nu[:, 0], 0.31 + 0.4 * psi, rtol=0, atol=1e-12)


# ----------------------------------------------------------------------------- maps
def test_octupole_kick_detuning(kicked_rotation):
    """Derived first-order detuning of rotation by mu = 2 pi Q0 followed by p -> p - c x^3.
    With x = sqrt(2J) cos(phi), p = -sqrt(2J) sin(phi) (canonical: dx ^ dp = dphi ^ dJ,
    and the rotation is phi -> phi + mu), the kick is the unit-time flow of
    V = c x^4 / 4. To first order in c it acts through its phase average
    <V> = c (2J)^2 <cos^4> / 4 = 3 c J^2 / 8, which adds dphi = d<V>/dJ = 3 c J / 4 per
    turn, so Q = Q0 + 3 c J / (8 pi) = Q0 + 3 c A^2 / (16 pi) for a seed (A, 0), J = A^2/2.
    The complex signal x - i p = sqrt(2J) e^{i phi} turns positively. The next order is
    O(c^2 A^4), so the relative error of the shift must scale like A^2."""
    A = np.array([0.025, 0.05, 0.1])
    Q0, c = 0.1813, 1.0
    res = frequencies(kicked_rotation, np.column_stack([A, 0 * A]), samples=4096, window=2)
    assert res.unit == "cycles per iterate"
    shift = res.nu[:, 0] - Q0
    predicted = 3 * c * A**2 / (16 * np.pi)
    rel = shift / predicted - 1
    assert np.all(np.abs(rel) < 0.5 * A**2)
    assert 3.0 < rel[1] / rel[0] < 5.0 and 3.0 < rel[2] / rel[1] < 5.0
    # the polar angle about the fixed point advances at the same mean rate
    rot = rotation_number(kicked_rotation, np.column_stack([A, 0 * A]), samples=4096,
                          angle=("x", "p"))
    np.testing.assert_allclose(rot.nu[:, 0], res.nu[:, 0], atol=1e-10)


def test_circle_rotation_is_exact(rotor):
    """At K = 0 the standard map turns q by the angle p on each line p = const: a rigid
    rotation by 2 pi w for p = 2 pi w, rotation number w (common practice), to 1e-14 from
    the lifted angle, though the map wraps q into [0, 2 pi); the frequency of exp(i q) is
    w folded, to the same accuracy."""
    for w in (0.1, 0.7236067977, 2.3819660113):
        seeds = [[0.3, 2 * np.pi * w], [5.0, 2 * np.pi * w]]
        rot = rotation_number(rotor, seeds, samples=1000, params={"K": 0.0})
        assert np.all(np.abs(rot.nu[:, 0] - w) < 1e-14)
        assert np.all(rot.diffusion < -13)
        freq = frequencies(rotor, seeds[:1], samples=1000, params={"K": 0.0})
        assert abs(freq.nu[0, 0] - ((w + 0.5) % 1 - 0.5)) < 1e-14


def test_standard_map_rotation_numbers(rotor):
    """At K = 0.5 the island around (pi, 0) librates: rotation number 0,
    and its tune tends to the linear value arccos(1 - K/2) / (2 pi) (trace of the
    Jacobian at the fixed point, common practice) at small amplitude; on a rotational
    invariant circle the frequency of exp(i q) equals the rotation number (mod 1)."""
    sm = rotor
    seeds = np.array([[np.pi + 1e-3, 0.0], [0.1, 1.0], [1.0, 2.5]])
    rot = rotation_number(sm, seeds, samples=2048, params={"K": 0.5})
    tune = frequencies(sm, seeds, samples=2048, params={"K": 0.5})
    assert abs(rot.nu[0, 0]) < 1e-12
    line = phaselab.state_grid(sm, {"q": (0.1, 0.2, 2), "p": (0.5, 2.5, 4)})
    profile = phaselab.frequency_map(sm, line, samples=2048, params={"K": 0.5}, angle="q")
    assert profile.kind == "rotation" and profile.image("nu").shape == (4, 2)
    direct = rotation_number(sm, line.states, samples=2048, params={"K": 0.5})
    np.testing.assert_array_equal(profile.nu, direct.nu)
    assert tune.nu[0, 0] == pytest.approx(np.arccos(1 - 0.25) / (2 * np.pi), abs=1e-6)
    np.testing.assert_allclose(tune.nu[1:, 0], (rot.nu[1:, 0] + 0.5) % 1 - 0.5, atol=1e-9)


def test_chaotic_orbits_diffuse(rotor):
    """Laskar 1993: on an invariant circle the frequency of the two halves agrees to the
    accuracy of the method; in a chaotic zone it does not. Standard map at K = 1.5: an
    island orbit near (pi, 0) against an orbit seeded in the chaotic sea near the
    hyperbolic point (0, 0) (Chirikov 1979)."""
    res = frequencies(rotor, [[np.pi + 0.2, 0.0], [1e-3, 1e-3]], samples=4096, params={"K": 1.5})
    assert res.diffusion[0] < -9
    assert res.diffusion[1] > -5


# ----------------------------------------------------------------------------- statuses
def test_stopped_orbits_and_still_degrees_of_freedom(kicked_rotation):
    res = frequencies(kicked_rotation, [[0.05, 0.0], [3.0, 0.0]], samples=256, box=1.0)
    assert res.status[0] == 0 and np.isfinite(res.nu[0, 0])
    assert res.status[1] == 1 and np.isnan(res.nu[1, 0]) and not res.valid[1]
    assert STATUS_TEXT[int(res.status[1])] == "left the box"
    still = frequencies(kicked_rotation, [[0.0, 0.0]], samples=64)
    assert still.status[0] == 10 and np.isnan(still.nu[0, 0])
    # a non-finite seed does not stop the batch: that orbit is flagged (as everywhere)
    mixed = frequencies(kicked_rotation, [[np.nan, 0.0], [0.05, 0.0]], samples=64)
    assert mixed.status[0] == 2 and np.isnan(mixed.nu[0, 0]) and mixed.status[1] == 0


# ----------------------------------------------------------------------------- frequency maps
def test_frequency_map_over_a_grid(tmp_path, kicked_rotation):
    xr = pytest.importorskip("xarray")
    grid = phaselab.state_grid(kicked_rotation, {"x": (0.02, 0.3, 5), "p": (-0.1, 0.1, 3)})
    one = phaselab.frequency_map(kicked_rotation, grid, samples=512)
    many = phaselab.frequency_map(kicked_rotation, grid, samples=512, batch_size=4)
    np.testing.assert_array_equal(one.nu, many.nu)
    np.testing.assert_array_equal(one.diffusion, many.diffusion)
    direct = frequencies(kicked_rotation, grid.states, samples=512)
    np.testing.assert_array_equal(one.nu, direct.nu)
    assert one.image("nu").shape == (3, 5)
    ds = one.to_xarray()
    assert ds["nu"].dims == ("p", "x", "dof") and list(ds["dof"].values) == ["x"]
    np.testing.assert_array_equal(ds["x"].values, grid.x)
    assert ds.attrs["method"] == "map" and "Q" in ds.attrs["params"]
    assert ds.attrs["phaselab_version"] == phaselab.__version__
    path = one.save(tmp_path / "tunes.nc")
    back = xr.open_dataset(path)
    np.testing.assert_array_equal(back["nu"].values, ds["nu"].values)
    back.close()
    assert sorted(os.listdir(tmp_path)) == ["tunes.nc"]     # no temporary left behind
    plain = tmp_path / "plain.txt"
    plain.write_text("x")                                    # a file made the ordinary way
    assert path.stat().st_mode & 0o777 == plain.stat().st_mode & 0o777


def test_frequency_map_on_a_shell_grid_skips_forbidden_points(pair):
    """Points outside the energy shell are not run (status -1) and stay NaN; the seed
    y = py = 0 leaves y at rest (status 10, nu_y NaN). The others have the tune
    sqrt(2) - 1 per crossing (derived in test_section_tune_of_an_isochronous_pair)."""
    grid = phaselab.shell_grid(pair, {"y": (-0.4, 0.4, 5), "py": (-0.3, 0.3, 3)}, energy=0.1,
                               plane={"x": 0.0}, solve_for="px")
    fm = phaselab.frequency_map(pair, grid, plane={"x": 0.0}, samples=128, dt=0.02,
                                method="yoshida8")
    assert np.all(fm.status[~grid.valid] == -1) and np.all(np.isnan(fm.nu[~grid.valid]))
    rest = (grid.states[:, 1] == 0) & (grid.states[:, 3] == 0)
    assert np.all(fm.status[rest] == 10) and np.all(np.isnan(fm.nu[rest, 0]))
    ok = fm.valid
    assert ok.sum() == grid.valid.sum() - 1
    np.testing.assert_allclose(fm.nu[ok, 0], math.sqrt(2) - 1, atol=1e-10)
    assert fm.to_xarray().attrs["energy"] == 0.1


@pytest.mark.slow
def test_frequency_map_on_dask_matches_local(kicked_rotation):
    distributed = pytest.importorskip("distributed")
    grid = phaselab.state_grid(kicked_rotation, {"x": (0.02, 0.3, 4), "p": (-0.1, 0.1, 3)})
    local = phaselab.frequency_map(kicked_rotation, grid, samples=256, batch_size=5)
    with distributed.LocalCluster(n_workers=1, threads_per_worker=2, processes=False,
                                  dashboard_address=None) as cluster, distributed.Client(cluster) as client:
        remote = phaselab.frequency_map(kicked_rotation, grid, samples=256, batch_size=5,
                                        client=client)
    np.testing.assert_array_equal(local.nu, remote.nu)


# ----------------------------------------------------------------------------- pictures
def test_resonance_lines():
    """All lines m nu1 + n nu2 = p with |m| + |n| <= 2 through the unit square, counted by
    hand: order 1: nu1 = 0, 1 and nu2 = 0, 1 (4); order 2: nu1 = 1/2, nu2 = 1/2,
    nu1 + nu2 = 0, 1, 2 (0 and 2 touch only a corner, so 1 line), nu1 - nu2 = -1, 0, 1
    (-1 and 1 touch a corner: 1 line): 4 lines."""
    from phaselab.frequency.resonances import resonances

    lines = resonances(2, (0.0, 1.0), (0.0, 1.0))
    got = sorted((r.m, r.n, r.p) for r in lines)
    assert got == sorted([(1, 0, 0), (1, 0, 1), (0, 1, 0), (0, 1, 1), (2, 0, 1), (0, 2, 1),
                          (1, 1, 1), (1, -1, 0)])
    flows = resonances(3, (0.1, 0.2), (0.1, 0.2), base=None)
    assert all(r.p == 0 for r in flows) and {(r.m, r.n) for r in flows} == {(1, -1)}


def _fake_result(n=60, seed=3):
    """A Frequencies result built by hand (no integration), for the pictures."""
    from phaselab.frequency.frequencies import Frequencies

    rng = np.random.default_rng(seed)
    nu = np.column_stack([0.20 + 0.05 * rng.random(n), 0.30 + 0.05 * rng.random(n)])
    seeds = np.column_stack([np.linspace(0, 1, n), np.zeros(n), np.zeros(n), np.zeros(n)])
    status = np.zeros(n, dtype=int)
    status[0] = 1
    return Frequencies(nu=nu, lines=None, diffusion=rng.uniform(-12, -2, n), status=status,
                       names=("x", "theta"), unit="cycles per iterate", kind="frequency",
                       sampling="map", base_frequency=1.0, seeds=seeds, method="map", n_samples=512,
                       window=1)


def test_frequency_map_figure_draws_labelled_resonances(tmp_path):
    from phaselab.export.frequency_figures import frequency_map_figure, save_figure

    fig = frequency_map_figure(_fake_result(), order=5, xlim=(0.19, 0.26), ylim=(0.29, 0.36))
    texts = [t.get_text() for t in fig.axes[0].texts]
    assert r"$\nu_{x}+\nu_{\theta}=1$" not in texts
    assert any(t.endswith("=1$") for t in texts)           # 2 nu_x + ... = 1 and the like
    assert len(fig.axes[0].lines) == len(texts) > 0
    path = save_figure(fig, tmp_path / "map.svg")
    svg = path.read_text()
    assert "<svg" in svg and sorted(os.listdir(tmp_path)) == ["map.svg"]


def test_diffusion_map_and_profile_figures(tmp_path, kicked_rotation):
    from phaselab.export.frequency_figures import diffusion_map_figure, frequency_profile_figure

    grid = phaselab.state_grid(kicked_rotation, {"x": (0.02, 0.3, 6), "p": (-0.1, 0.1, 4)})
    fm = phaselab.frequency_map(kicked_rotation, grid, samples=256)
    fig = diffusion_map_figure(fm, title="kicked rotation")
    assert fig.axes[0].get_xlabel() == "$x$"
    fm.save(tmp_path / "diffusion.png")
    res = frequencies(kicked_rotation, np.column_stack([np.linspace(0.01, 0.3, 12), np.zeros(12)]),
                      samples=256)
    fig = frequency_profile_figure(res, along="x", rationals=5, ylim=(0.17, 0.21))
    assert "1/5" in [t.get_text() for t in fig.axes[0].texts]
    res.save(tmp_path / "profile.pdf")
    assert sorted(os.listdir(tmp_path)) == ["diffusion.png", "profile.pdf"]
    with pytest.raises(PhaselabError, match="two frequencies"):
        from phaselab.export.frequency_figures import frequency_map_figure

        frequency_map_figure(res)
    with pytest.raises(PhaselabError, match="grid"):
        diffusion_map_figure(res)
    with pytest.raises(PhaselabError, match=".nc, .svg"):
        res.save(tmp_path / "profile.txt")


# ----------------------------------------------------------------------------- bad input
def test_bad_input(oscillator, kicked_rotation):
    H, M = oscillator, kicked_rotation
    cases = [
        (lambda: frequencies(H, [[0.1, 0.0]]), "t .*is needed"),
        (lambda: frequencies(M, [[0.1, 0.0]], t=10.0), "give the number of iterates"),
        (lambda: frequencies(M, [[0.1, 0.0]], samples=8), "samples must be at least 32"),
        (lambda: frequencies(M, [[0.1, 0.0]], samples=100.5), "samples must be an integer"),
        (lambda: frequencies(M, [[0.1, 0.0]], window=9), "window must be at most 8"),
        (lambda: frequencies(M, [[0.1, 0.0]], lines=0), "lines must be at least 1"),
        (lambda: frequencies(M, [[0.1, 0.0]], fold="up"), "fold must be"),
        (lambda: frequencies(M, [[0.1, 0.0, 0.2]]), r"states must have shape \(2,\)"),
        (lambda: frequencies(M, "seeds"), "states must be real numbers"),
        (lambda: frequencies(M, [[0.1, 0.0]], plane={"x": 0.0}), "plane is not used for a map"),
        (lambda: frequencies(H, [[0.1, 0.0]], t=-1.0), "t must be positive"),
        (lambda: frequencies(H, [[0.1, 0.0]], t=10.0, dt=0.0), "dt must be positive"),
        (lambda: frequencies(H, [[0.1, 0.0]], plane="sideways"), "plane must be a mapping"),
        (lambda: frequencies(H, [[0.1, 0.0]], plane={"x": 0.0}, t=5.0), "sampled per crossing"),
        (lambda: frequencies(H, [[0.1, 0.0]], t=10.0, direction=0), "direction must be"),
        (lambda: frequencies(M, [[0.1, 0.0]], params={"kick": 1.0}), "unknown parameter"),
        (lambda: frequencies(M, [[0.1, 0.0]], angles={"p": 1.0}), "is a momentum"),
        (lambda: frequencies(M, [[0.1, 0.0]], angles={"z": 1.0}), "unknown angle in angles 'z'"),
        (lambda: frequencies(M, [[0.1, 0.0]], angles={"x": -1.0}), "must be positive"),
        (lambda: frequencies(M, [[0.1, 0.0]], box="wide"), "box must be a positive number"),
        (lambda: rotation_number(M, [[0.1, 0.0]], angle="z"), "unknown angle 'z'"),
        (lambda: rotation_number(M, [[0.1, 0.0]], angle=("x",)), "pair must name"),
        (lambda: rotation_number(M, [[0.1, 0.0]], center=(0, 0)), "center is used only"),
        (lambda: rotation_number(M, [[0.1, 0.0]], angle=("x", "p"), center=(0, "a")), "center"),
        (lambda: phaselab.frequency_map(M, [[0.1, 0.0]], batch_size=0), "batch_size"),
        (lambda: phaselab.frequency_map(M, [[0.1]]), r"states must have shape \(n_seeds, 2\)"),
    ]
    for call, message in cases:
        with pytest.raises(ParameterError, match=message):
            call()
    H2 = phaselab.Hamiltonian("(px**2 + py**2 + x**2 + y**2)/2", ["x", "y"], ["px", "py"])
    with pytest.raises(ParameterError, match="angle=... is needed"):
        rotation_number(H2, [[0.1, 0.0, 0.0, 0.1]], t=10.0)
