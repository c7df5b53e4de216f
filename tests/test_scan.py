"""Scans over grids of seeds and parameters, locally and on a Dask cluster."""

import numpy as np
import pytest

import phaselab
from phaselab.errors import ModelError, ParameterError
from phaselab.scan import chaos_map, parameter_scan, state_grid


@pytest.fixture(scope="module")
def kicked_rotor():
    return phaselab.models.standard_map()


def chaotic_fraction(cmap, threshold=3.0):
    v = cmap.values[np.isfinite(cmap.values)]
    return float(np.mean(v > threshold))


def test_standard_map_chaos_grows_with_the_kick(kicked_rotor):
    # Chirikov 1979 (Phys. Rep. 52, 263): for K well below the break-up of the last
    # invariant circle (K ~ 0.97, Greene 1979) most of the phase space is regular; for
    # K = 5 almost all of it is a chaotic sea (a few small islands remain). MEGNO near 2
    # marks regular orbits, large values chaotic ones (Cincotta & Simo 2000).
    grid = state_grid(kicked_rotor, {"q": (0.0, 2 * np.pi, 24), "p": (0.0, 2 * np.pi, 24)})
    weak = chaos_map(kicked_rotor, grid, 400, params={"K": 0.3})
    strong = chaos_map(kicked_rotor, grid, 400, params={"K": 5.0})
    assert weak.image.shape == (24, 24)
    assert chaotic_fraction(weak) < 0.1
    assert chaotic_fraction(strong) > 0.8


def test_batches_do_not_change_results(kicked_rotor):
    grid = state_grid(kicked_rotor, {"q": (0.1, 6.0, 7), "p": (0.1, 6.0, 5)})
    one = chaos_map(kicked_rotor, grid, 200, indicator="lyapunov")
    many = chaos_map(kicked_rotor, grid, 200, indicator="lyapunov", batch_size=4)
    np.testing.assert_array_equal(one.values, many.values)


@pytest.mark.slow
def test_dask_client_gives_the_same_map(kicked_rotor):
    distributed = pytest.importorskip("distributed")
    grid = state_grid(kicked_rotor, {"q": (0.1, 6.0, 6), "p": (0.1, 6.0, 6)})
    local = chaos_map(kicked_rotor, grid, 300, indicator="fli", batch_size=9)
    with distributed.LocalCluster(n_workers=1, threads_per_worker=2, processes=False,
                                  dashboard_address=None) as cluster, distributed.Client(cluster) as client:
        remote = chaos_map(kicked_rotor, grid, 300, indicator="fli", batch_size=9, client=client)
    np.testing.assert_array_equal(local.values, remote.values)


def test_parameter_scan_over_a_grid():
    # small-oscillation frequency of H = p^2/2 + w^2 q^2/2 is w (common practice): scan w and
    # read the period back from the equilibrium's eigenvalues
    O = phaselab.Hamiltonian("p**2/2 + w**2*q**2/2", ["q"], ["p"], params={"w": 1.0})

    def frequency(params):
        (eq,) = phaselab.equilibria(O, params=params)
        return float(np.max(np.abs(np.imag(eq.eigenvalues))))

    scan = parameter_scan(frequency, {"w": [0.5, 1.0, 2.0]})
    np.testing.assert_allclose(scan.array(), [0.5, 1.0, 2.0], rtol=1e-10)
    assert scan.points[2] == {"w": 2.0}


def test_bad_input(kicked_rotor):
    with pytest.raises(ModelError, match="unknown indicator"):
        chaos_map(kicked_rotor, [[0.1, 0.2]], 10, indicator="colour")
    with pytest.raises(ModelError, match="unknown state component"):
        state_grid(kicked_rotor, {"x": (0, 1), "p": (0, 1)})
    with pytest.raises(ModelError, match="low < high"):
        state_grid(kicked_rotor, {"q": (1, 0), "p": (0, 1)})
    with pytest.raises(ParameterError, match="unknown parameters"):
        chaos_map(kicked_rotor, [[0.1, 0.2]], 10, params={"kick": 1.0})
    with pytest.raises(ParameterError, match="finite"):
        parameter_scan(lambda p: 0, {"K": [1.0, float("nan")]})
