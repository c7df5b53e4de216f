"""Accuracy asked instead of a step (step doubling), the error reached in every result that
integrates, and the warning on aliased records; against closed forms and scipy."""

import warnings

import numpy as np
import pytest
from scipy.special import ellipk

import phaselab
from phaselab.errors import ParameterError

W0, THETA0 = 1.3, 1.0


@pytest.fixture(scope="module")
def pendulum13():
    """H = p^2/2 - w0^2 cos q: a pendulum of small-oscillation frequency w0."""
    return phaselab.Hamiltonian("p**2/2 - w**2*cos(q)", ["q"], ["p"], params={"w": W0})


def _pendulum_frequency():
    """The pendulum's exact frequency from amplitude theta0 (released at rest):
    T = 4 K(m) / w0 with m = sin^2(theta0 / 2), K the complete elliptic integral of the first
    kind (common practice; K from scipy.special.ellipk, which takes the parameter m)."""
    return W0 / (4.0 * ellipk(np.sin(THETA0 / 2) ** 2))


@pytest.mark.parametrize("accuracy", [1e-8, 1e-5])
def test_asked_accuracy_bounds_the_frequency_error(pendulum13, accuracy):
    """frequencies(..., accuracy=a) has a relative frequency error below a against the exact
    period by scipy.special.ellipk, reports the error reached (at most a), and the report is
    honest: the true error is not above it by more than a factor 2."""
    f_exact = _pendulum_frequency()
    t = 400.0 / f_exact
    res = phaselab.frequencies(pendulum13, [THETA0, 0.0], t=t, samples=8192, accuracy=accuracy)
    err = abs(res.nu[0, 0] / f_exact - 1.0)
    assert err < accuracy
    assert 0 < res.error_estimate <= accuracy
    assert err <= 2.0 * res.error_estimate
    assert res.to_xarray().attrs["error_estimate"] == pytest.approx(res.error_estimate)


def test_trajectory_accuracy_gives_the_period(pendulum13):
    """trajectory(..., accuracy=1e-8) over 50 periods: the time of the last downward
    crossing of q = 0, from a cubic through four samples, matches k + 1/4 exact periods
    (scipy.special.ellipk) to 1e-8 relative; the reported error is at most 1e-8 and
    the default step states its own (finite, below 1e-5)."""
    T = 1.0 / _pendulum_frequency()
    tr = phaselab.trajectory(pendulum13, [THETA0, 0.0], (0.0, 50 * T), accuracy=1e-8, save_every=1)
    assert tr.error_estimate <= 1e-8
    q, t = tr.states[0, :, 0], tr.t
    down = np.flatnonzero((q[:-1] > 0) & (q[1:] <= 0))
    k = down[-1]
    sl = slice(k - 1, k + 3)
    coef = np.polyfit(t[sl] - t[k], q[sl], 3)
    roots = np.roots(coef)
    root = roots[np.isreal(roots) & (roots.real >= -1e-12) & (roots.real <= t[k + 1] - t[k] + 1e-12)].real
    crossing = t[k] + root[0]
    # released at rest at q = theta0 > 0: q = 0 going down at T/4, then every period
    assert crossing / ((len(down) - 1 + 0.25) * T) - 1.0 == pytest.approx(0.0, abs=1e-8)
    default = phaselab.trajectory(pendulum13, [THETA0, 0.0], 10.0)
    assert 0 < default.error_estimate < 1e-5


def test_accuracy_arguments_are_checked(pendulum13, standard_map):
    with pytest.raises(ParameterError, match="dt or accuracy"):
        phaselab.trajectory(pendulum13, [THETA0, 0.0], 1.0, dt=0.01, accuracy=1e-6)
    with pytest.raises(ParameterError, match="accuracy"):
        phaselab.trajectory(pendulum13, [THETA0, 0.0], 1.0, accuracy=2.0)
    with pytest.raises(ParameterError, match="dop853"):
        phaselab.trajectory(pendulum13, [THETA0, 0.0], 1.0, method="dop853", accuracy=1e-6)
    with pytest.raises(ParameterError, match="map"):
        phaselab.frequencies(standard_map, [[0.1, 0.2]], samples=64, accuracy=1e-6)


def test_aliased_record_warns_and_the_advised_n_resolves_it():
    """A harmonic oscillator of frequency f0 = 0.2697 (exact: w / 2 pi, common practice)
    sampled every 2.9 time units (more than half its period 3.71) is folded to
    f0 - 1/2.9 = -0.0751: a warning says so and advises an n; with that n the frequency is
    right and no warning comes. A record fine enough gives no warning."""
    f0 = 0.2697
    H = phaselab.Hamiltonian("p**2/2 + w**2*q**2/2", ["q"], ["p"], params={"w": 2 * np.pi * f0})
    t = 255 * 2.9
    with pytest.warns(RuntimeWarning, match="aliased") as rec:
        folded = phaselab.frequencies(H, [1.0, 0.0], t=t, samples=256)
    assert folded.nu[0, 0] == pytest.approx(f0 - 1 / 2.9, abs=1e-6)
    text = str(rec[0].message)
    n_advised = int(text.split("use n >= ")[1].split()[0])
    assert 2 * f0 * t + 1 < n_advised <= 1.5 * 2 * f0 * t + 2   # Nyquist: n - 1 >= 2 f0 t
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        good = phaselab.frequencies(H, [1.0, 0.0], t=t, samples=n_advised)
        fine = phaselab.frequencies(H, [1.0, 0.0], t=255.0, samples=256)
    assert good.nu[0, 0] == pytest.approx(f0, rel=1e-6)
    assert fine.nu[0, 0] == pytest.approx(f0, rel=1e-6)


def test_rotating_angle_sampled_too_sparsely_warns(pendulum13):
    """A pendulum rotating over the top from (0, 10) turns about 10 / (2 pi) = 1.6 times per
    unit time (dq/dt = p, between sqrt(100 - 4 w0^2) = 9.66 at the top and 10 at the bottom,
    by energy conservation of H = p^2/2 - w0^2 cos q; derived here): sampled every 0.5 with q
    declared an angle its line folds into |nu| < 1 and a warning says so; sampled every 0.1
    no warning comes, and the rate lies between those bounds over 2 pi."""
    seed = [0.0, 10.0]
    with pytest.warns(RuntimeWarning, match="aliased"):
        phaselab.frequencies(pendulum13, seed, t=0.5 * 511, samples=512, angles={"q": 2 * np.pi})
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        fine = phaselab.frequencies(pendulum13, seed, t=0.1 * 511, samples=512,
                                    angles={"q": 2 * np.pi})
    p_min = np.sqrt(100.0 - 4 * W0**2)      # p at q = pi from H(0, 10) = H(pi, p)
    assert p_min / (2 * np.pi) < fine.nu[0, 0] < 10.0 / (2 * np.pi)


@pytest.mark.parametrize("m", [2, 4, 6])
def test_largest_imaginary_part_matches_numpy(m):
    """The closed forms for the eigenvalues of 2x2 and 4x4 Hamiltonian matrices (Omega S, S
    symmetric) against numpy.linalg.eigvals (reference library)."""
    from phaselab.frequency.aliasing import largest_imaginary_part

    n = m // 2
    rng = np.random.default_rng(m)
    S = rng.normal(size=(500, m, m))
    S = S + S.transpose(0, 2, 1)
    omega = np.block([[np.zeros((n, n)), np.eye(n)], [-np.eye(n), np.zeros((n, n))]])
    J = omega @ S
    ref = np.abs(np.linalg.eigvals(J).imag).max(axis=1)
    np.testing.assert_allclose(largest_imaginary_part(J), ref, rtol=1e-9, atol=1e-9)
