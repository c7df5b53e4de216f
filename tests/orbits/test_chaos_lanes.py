"""The chaos-indicator loop that steps two orbits side by side (H = p^2/2 + V(q), the system's
inlined loops): the same numbers as the general loop, orbit by orbit, whatever stops."""

import numpy as np
import pytest

import phaselab
from phaselab.engine.compiled import loops

pytestmark = pytest.mark.slow      # compiles the inlined modules of two systems


def _indicators(system, states, t, monkeypatch, form, **kw):
    monkeypatch.setenv("PHASELAB_LOOPS", form)
    res = phaselab.chaos_indicators(system, states, t, method="yoshida4", dt=0.01, **kw)
    rows = [res.lyapunov, res.megno, res.fli, res.sali, res.status, res.t_end]
    return np.concatenate([np.ravel(r).astype(float) for r in rows]
                          + [np.ravel(res.history[key]) for key in sorted(res.history)])


@pytest.mark.parametrize("vectors", [1, 2])
def test_side_by_side_loop_gives_the_general_loops_numbers(monkeypatch, vectors):
    """Orbits that escape, seeds outside the box, an odd count, running values recorded:
    the side-by-side loop (inlined) and the general loop (generic) agree to the last bit."""
    quartic = phaselab.Hamiltonian("p**2/2 + q**2/2 - q**4/4", ["q"], ["p"])
    states = np.column_stack([np.linspace(-0.9, 0.9, 23), np.linspace(0.2, 0.9, 23)])
    states[3] = [5.0, 0.0]      # outside the box from the start
    states[7] = [0.99, 0.8]     # above the saddles at q = +-1 (energy 1/4): escapes
    kw = dict(vectors=vectors, save_every=300, box=3.0)
    general = _indicators(quartic, states, 30.0, monkeypatch, "generic", **kw)
    side = _indicators(quartic, states, 30.0, monkeypatch, "inlined", **kw)
    assert np.array_equal(general, side, equal_nan=True)


def test_side_by_side_megno_of_an_integrable_orbit_tends_to_two(monkeypatch):
    """MEGNO of a quasi-periodic orbit (two uncoupled anharmonic oscillators: integrable,
    frequencies depending on the amplitudes) tends to 2 (Cincotta & Simo 2000, Astron.
    Astrophys. Suppl. 147, 205); it is 0 for the isochronous harmonic oscillator (same paper)."""
    monkeypatch.setenv("PHASELAB_LOOPS", "inlined")
    H = phaselab.Hamiltonian("p1**2/2 + p2**2/2 + q1**2/2 + q1**4/4 + q2**2/2 + q2**4/4", ["q1", "q2"], ["p1", "p2"])
    res = phaselab.chaos_indicators(H, [[0.5, 0.3, 0.0, 0.2], [0.8, -0.4, 0.1, 0.0], [0.2, 0.6, 0.3, 0.1]], 2000.0,
                                    method="yoshida4", dt=0.02, vectors=1)
    assert np.all(np.abs(res.megno - 2.0) < 0.1), res.megno


def test_orbits_whose_block_is_not_the_identity_are_left_for_the_general_loop(monkeypatch):
    """T = p1^2/2 + p1^4/12 + p2^2/2: d2H/dp2 is the identity only where p1 = 0. The
    side-by-side loop runs those orbits (the numbers of the general loop holding the block
    of the start, an identity) and marks the others skipped, untouched."""
    monkeypatch.setenv("PHASELAB_LOOPS", "inlined")
    H = phaselab.Hamiltonian("p1**2/2 + p1**4/12 + p2**2/2 + q1**2/2 + q2**2/2 + q1**2*q2", ["q1", "q2"],
                             ["p1", "p2"])
    z = np.array([[0.1, 0.2, 0.0, 0.3], [0.1, 0.2, 0.2, 0.3], [0.0, 0.1, 0.0, 0.2], [0.3, 0.0, -0.1, 0.1],
                  [0.2, -0.1, 0.0, 0.0]])
    W0 = np.ascontiguousarray(phaselab.orbits.chaos.deviation_vectors(z, 0, 1, np.ones(4, dtype=bool)))
    w = np.array([1.0 / (2.0 - 2.0 ** (1.0 / 3.0))])
    weights = np.array([w[0], 1.0 - 2.0 * w[0], w[0]])
    lo, hi = np.full(4, -np.inf), np.full(4, np.inf)
    values = H.param_values(None)

    def outputs():
        return (np.full((5, 4), np.nan), np.full((5, 2, 4), np.nan), np.zeros(5, dtype=np.int64),
                np.full(5, -1, dtype=np.int64))

    side, skipped = outputs(), np.zeros(5, dtype=bool)
    loops(H, "tangent_lanes").lanes_composition_indicators(z, W0, values, 0.01, 500, 250, weights, lo, hi, *side,
                                                           skipped)
    general = outputs()
    loops(H, "tangent").tangent_composition_indicators(z, W0, values, 0.01, 500, 250, weights, True, lo, hi,
                                                       *general)
    assert skipped.tolist() == [False, True, False, True, False]
    ran = ~skipped
    for a, b in zip(side, general):
        assert np.array_equal(a[ran], b[ran], equal_nan=True)
    assert np.all(np.isnan(side[0][skipped])) and np.all(side[3][skipped] == -1)


def test_skipped_orbits_are_run_by_the_general_loop(monkeypatch):
    """When the check of a constant block misses (here forced: it reports the identity), the
    orbits whose block at the start is not the identity still get the general loop's numbers
    (holding the block of their start), in their places."""
    from phaselab.orbits import chaos

    monkeypatch.setenv("PHASELAB_LOOPS", "inlined")
    H = phaselab.Hamiltonian("p1**2/2 + p1**4/12 + p2**2/2 + q1**2/2 + q2**2/2 + q1**2*q2", ["q1", "q2"],
                             ["p1", "p2"])
    z = np.array([[0.1, 0.2, 0.0, 0.3], [0.1, 0.2, 0.2, 0.3], [0.0, 0.1, 0.0, 0.2], [0.3, 0.0, -0.1, 0.1]])
    monkeypatch.setattr(chaos, "_constant_pp", lambda cs, z, values: np.eye(2))
    res = phaselab.chaos_indicators(H, z, 5.0, method="yoshida4", dt=0.01, vectors=2, save_every=100)
    W0 = np.ascontiguousarray(chaos.deviation_vectors(z, 0, 2, np.ones(4, dtype=bool)))
    w = 1.0 / (2.0 - 2.0 ** (1.0 / 3.0))
    final, hist = np.full((4, 4), np.nan), np.full((4, 5, 4), np.nan)
    status, stop = np.zeros(4, dtype=np.int64), np.full(4, -1, dtype=np.int64)
    loops(H, "tangent").tangent_composition_indicators(z, W0, H.param_values(None), 0.01, 500, 100,
                                                       np.array([w, 1.0 - 2.0 * w, w]), True, np.full(4, -np.inf),
                                                       np.full(4, np.inf), final, hist, status, stop)
    assert np.array_equal(np.column_stack([res.lyapunov, res.megno, res.fli, res.sali]), final)
    assert np.array_equal(res.history["megno"], hist[:, :, 1])
