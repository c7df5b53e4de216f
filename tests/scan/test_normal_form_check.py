"""phaselab.normal_form_check: a normal form's detuning and island beside the measurement.

Outside references: the pendulum's exact period T = 4 K(k), k^2 = E/2 (complete elliptic
integral, mpmath.ellipk; Landau & Lifshitz, Mechanics §11, problem 1) and its action by
mpmath quadrature; orbits integrated by phaselab and analysed by Laskar's method stand for
the measurement.
"""

import mpmath as mp
import numpy as np
import pytest
import sympy as sp

import phaselab
from phaselab import ModelError, ParameterError

q, p, q1, q2, p1, p2 = sp.symbols("q p q1 q2 p1 p2", real=True)


def unit_pendulum():
    return phaselab.Hamiltonian(p**2 / 2 - sp.cos(q), [q], [p], name="unit pendulum")


def pendulum_frequency(E):
    """Angular frequency 2 pi / T of H = p^2/2 + 1 - cos q at energy E: T = 4 K(k^2 = E/2)
    (mpmath.ellipk takes the parameter m = k^2)."""
    with mp.workdps(30):
        return float(2 * mp.pi / (4 * mp.ellipk(mp.mpf(E) / 2)))


def test_pendulum_detuning_beside_measurement_falls_with_the_order():
    """Orbits launched at J = 0.2, 0.1, 0.05. (1) The measured frequencies agree with the exact
    2 pi / T(E) at each orbit's energy (mpmath, elliptic integral) to 1e-8. (2) The normal
    form's dH/dJ differs from the measurement by O(J^(order/2)): halving J divides the gap
    by about 4 at order 4 and 8 at order 6 (the first neglected term of the Birkhoff series)."""
    system = unit_pendulum()
    J = [[0.2], [0.1], [0.05]]
    for order, ratio in ((4, 4.0), (6, 8.0)):
        nf = phaselab.normal_form(system, [0, 0], order)
        check = phaselab.normal_form_check(system, nf, J, 400.0, samples=2048, dt=0.05, method="yoshida6")
        assert check.unit == "rad per unit time" and np.all(check.status == 0)
        energy = 1 - np.cos(check.states[:, 0]) + check.states[:, 1] ** 2 / 2
        exact = np.array([pendulum_frequency(E) for E in energy])
        assert np.abs(check.measured[:, 0] - exact).max() < 1e-8
        gap = np.abs(check.gap[:, 0])
        assert gap[0] < 5e-4
        steps = gap[:-1] / gap[1:]
        assert np.all(np.abs(steps / ratio - 1) < 0.15), (order, steps)
        assert np.allclose(check.predicted[:, 0], nf.frequencies(np.array(J))[:, 0], rtol=0, atol=0)


def detuned_two_to_one():
    """omega = (1, 21/10) with a quartic twist in mode 1: the 2:1 resonance 2 w1 = w2 is met
    away from the equilibrium, where the weak cubic coupling makes an island."""
    H = ((p1**2 + q1**2) / 2 + (p2**2 + sp.Rational(21, 10)**2 * q2**2) / 2
         + sp.Rational(1, 200) * q1**2 * q2 + q1**4 / 10)
    return phaselab.Hamiltonian(H, [q1, q2], [p1, p2], name="detuned two to one")


def test_island_width_beside_the_section():
    """The pendulum model of the 2:1 resonant form predicts the island's full width; orbits
    launched across it and followed on the section q2 = 0 (phaselab.section) librate inside
    and circulate outside. The measured width (edges midway between the last librating and
    the first circulating orbit) must agree with the prediction to the launch spacing plus
    the order's error (a few per cent here: the next terms are smaller by about the action,
    J ~ 0.1). The frequencies away from the island agree with the angle-free detuning."""
    system = detuned_two_to_one()
    nf = phaselab.normal_form(system, [0, 0, 0, 0], 6, resonances=[(2, -1)])
    check = phaselab.normal_form_check(system, nf, [[0.05, 0.1], [0.1, 0.1]], 200.0, samples=1024,
                                       island=[0.17, 0.1], island_orbits=21)
    island = check.island
    assert island.resonance == (2, -1)
    centre = island.center_actions
    assert abs(nf.frequencies([centre])[0] @ (2, -1)) < 1e-12  # on the resonance
    assert abs(centre @ (1, 2) - 0.17 - 0.2) < 1e-12           # reached along k: J1 + 2 J2 kept
    assert island.librating[len(island.launched) // 2]
    assert abs(island.measured_width - island.predicted_width) <= island.resolution + 0.05 * island.predicted_width
    lo, hi = island.edges
    assert abs(hi + lo) <= island.resolution                    # an island symmetric about its centre
    assert not island.librating[0] and not island.librating[-1]
    assert np.all(np.abs(check.gap) < 2e-3)


def test_map_detuning_beside_measured_tunes(standard_map):
    """The standard map at K = 1/2 about (pi, 0): the rotation angle per iterate of the order-6
    normal form against Laskar's analysis of the iterates; the gap falls like J^3."""
    nf = phaselab.normal_form(standard_map, [np.pi, 0.0], 6, params={"K": 0.5})
    check = phaselab.normal_form_check(standard_map, nf, [[0.02], [0.01]], samples=4096)
    assert check.unit == "rad per iterate" and check.t is None
    gap = np.abs(check.gap[:, 0])
    assert gap[0] < 1e-4 and 5 < gap[0] / gap[1] < 12


def test_numbers_files_and_figure(tmp_path):
    system = unit_pendulum()
    nf = phaselab.normal_form(system, [0, 0], 4)
    check = phaselab.normal_form_check(system, nf, [0.1, 0.05], 100.0, samples=512)
    rows = check.table()
    assert [r["J1"] for r in rows] == [0.1, 0.05] and rows[0]["status"] == "ok"
    assert rows[0]["gap1"] == rows[0]["predicted1"] - rows[0]["measured1"]
    ds = check.to_xarray()
    assert ds["measured"].attrs["long_name"] and ds.attrs["order"] == 4
    path = check.save(tmp_path / "check.nc")
    import xarray as xr

    with xr.open_dataset(path) as back:
        assert np.allclose(back["predicted"].values, check.predicted)
    fig = check.plot(title="Pendulum")
    words = " ".join(t.get_text() for t in fig.texts)
    assert "unit pendulum" in words and "phaselab " + phaselab.__version__ in words
    assert "order 4" in words and "Model results" in words
    check.save(tmp_path / "check.png")
    assert not [f for f in tmp_path.iterdir() if f.name.endswith(".tmp")]


def test_bad_arguments():
    system = unit_pendulum()
    nf = phaselab.normal_form(system, [0, 0], 4)
    with pytest.raises(ParameterError, match="t "):
        phaselab.normal_form_check(system, nf, [[0.1]])
    with pytest.raises(ParameterError, match="actions must have shape"):
        phaselab.normal_form_check(system, nf, [[0.1, 0.2]], 10.0)
    with pytest.raises(ParameterError, match=">= 0"):
        phaselab.normal_form_check(system, nf, [[-0.1]], 10.0)
    with pytest.raises(ParameterError, match="NormalForm"):
        phaselab.normal_form_check(system, "nf", [[0.1]], 10.0)
    other = detuned_two_to_one()
    with pytest.raises(ParameterError, match="not of this"):
        phaselab.normal_form_check(other, nf, [[0.1]], 10.0)
    birkhoff = phaselab.normal_form(other, [0, 0, 0, 0], 4)
    with pytest.raises(ModelError, match="no island"):
        phaselab.normal_form_check(other, birkhoff, [[0.1, 0.1]], 10.0, samples=64, island=[0.17, 0.1])
    resonant = phaselab.normal_form(other, [0, 0, 0, 0], 4, resonances=[(2, -1)])
    with pytest.raises(ParameterError, match="island must be 2"):
        phaselab.normal_form_check(other, resonant, [[0.1, 0.1]], 10.0, samples=64, island=[0.17])


def test_a_mode_launched_without_action_is_not_measured():
    system = detuned_two_to_one()
    nf = phaselab.normal_form(system, [0, 0, 0, 0], 4)
    check = phaselab.normal_form_check(system, nf, [[0.02, 0.0]], 100.0, samples=512)
    assert np.isnan(check.measured[0, 1]) and np.isfinite(check.measured[0, 0])
    assert abs(check.gap[0, 0]) < 1e-3


NAN, INF = float("nan"), float("inf")
BAD = {
    "system": [None, "p**2/2", 1.0, object()],
    "nf": [None, "nf", 3, object()],
    "actions": [None, "abc", object(), [[1j]], [[NAN]], [[INF]], [[-1.0]], [], [[[0.1]]], [["a"]]],
    "t": [None, NAN, INF, -1.0, 0.0, "1", 1j, True],
    "angles": ["abc", object(), [[NAN]], [[0.1, 0.2]], [[1j]]],
    "samples": [-1, 0, 1.5, NAN, "10", True, 10**12],
    "dt": [NAN, INF, -1.0, 0.0, "0.1"],
    "method": [3, "nope", None],
}
ISLAND_BAD = {
    "island": ["ab", object(), [NAN, 0.1], [0.1], [[0.1, 0.1]], [1j, 0.1], [-0.1, 0.1]],
    "resonance": ["ab", 3, [0, 0], [1.5, -2], [1, -2, 0], [True, 1]],
    "island_orbits": [-1, 0, 4, 1.5, NAN, "10", 10**9],
    "crossings": [-1, 0, 1.5, NAN, "10", 10**9],
    "plane": ["x", 5, {"nope": 0.0}, {"q1": NAN}, {"q1": "a"}],
    "direction": [0, 2, "up", NAN],
}


@pytest.mark.parametrize("arg, value", [(a, v) for a, vs in BAD.items() for v in vs])
def test_every_bad_argument_is_refused_by_phaselab(arg, value):
    """Each argument's bad values end in a PhaselabError subclass, never numpy's or Python's own."""
    system = unit_pendulum()
    nf = phaselab.normal_form(system, [0, 0], 4)
    args = {"system": system, "nf": nf, "actions": [[0.1]], "t": 20.0}
    kwargs = {"samples": 64}
    (args if arg in args else kwargs)[arg] = value
    with pytest.raises(phaselab.PhaselabError):
        phaselab.normal_form_check(args["system"], args["nf"], args["actions"], args["t"], **kwargs)


@pytest.mark.parametrize("arg, value", [(a, v) for a, vs in ISLAND_BAD.items() for v in vs])
def test_every_bad_island_argument_is_refused_by_phaselab(arg, value):
    system = detuned_two_to_one()
    nf = phaselab.normal_form(system, [0, 0, 0, 0], 4, resonances=[(2, -1)])
    kwargs = {"samples": 64, "island": [0.17, 0.1], "island_orbits": 5, "crossings": 20, arg: value}
    with pytest.raises(phaselab.PhaselabError):
        phaselab.normal_form_check(system, nf, [[0.1, 0.1]], 20.0, **kwargs)
