"""Slices of independent orbits on threads (engine/orbit_threads.py): the split, the
fallback to one call, errors handed back, and the same numbers as one thread."""

import numba
import numpy as np
import pytest

import phaselab
from phaselab.engine.compiled import loops
from phaselab.engine.orbit_threads import run_sliced, sliceable, split


@numba.njit(nogil=True, cache=False)
def _square_rows(kern, Z0, scale, out):
    for o in range(Z0.shape[0]):
        if Z0[o, 0] < 0.0:
            raise ValueError("negative")
        out[o] = scale * Z0[o, 0] * Z0[o, 1]


def test_split_covers_every_row_once_in_contiguous_slices():
    for n in (1, 2, 3, 7, 100):
        for slices in (1, 2, 3, 8, 16):
            b = split(n, slices)
            assert b[0] == 0 and b[-1] == n
            assert len(b) - 1 == min(n, slices)
            assert np.all(np.diff(b) >= 1)


def test_sliceable_needs_the_same_rows_in_every_named_argument():
    a, b = np.zeros((5, 2)), np.zeros(5)
    assert sliceable((0, a, 1.0, b), (1, 3)) == 5
    assert sliceable((0, a, 1.0, np.zeros(4)), (1, 3)) == 0
    assert sliceable((0, a, 1.0, b), (1, 2)) == 0     # a number has no rows


def test_sliced_call_gives_the_numbers_of_one_call_and_hands_errors_back():
    Z = np.random.default_rng(0).uniform(0.1, 1.0, (37, 2))
    whole, parts = np.zeros(37), np.zeros(37)
    _square_rows(0, Z, 3.0, whole)
    run_sliced(_square_rows, (0, Z, 3.0, parts), (1, 3), threads=4)
    assert np.array_equal(whole, parts)
    big = np.random.default_rng(1).uniform(0.1, 1.0, (300, 2))       # several slices per thread
    whole_big, parts_big = np.zeros(300), np.zeros(300)
    _square_rows(0, big, 3.0, whole_big)
    run_sliced(_square_rows, (0, big, 3.0, parts_big), (1, 3), threads=2)
    assert np.array_equal(whole_big, parts_big)
    run_sliced(_square_rows, (0, Z[:3], 3.0, parts[:3]), (1, 3), threads=8)   # fewer rows than slices
    assert np.array_equal(whole[:3], parts[:3])
    Z[30, 0] = -1.0                                   # in one of the last slices
    with pytest.raises(ValueError, match="negative"):
        run_sliced(_square_rows, (0, Z, 3.0, parts), (1, 3), threads=4)


def test_section_on_two_threads_equals_one_thread(henon_heiles):
    """The orbits are independent: the threaded section equals the single-thread one to the
    last bit (common practice: the same floating-point operations per orbit)."""
    seeds = phaselab.shell_seeds(henon_heiles, {"y": np.linspace(-0.3, 0.4, 5), "py": 0.0}, energy=0.1,
                                 plane={"x": 0.0}, solve_for="px").valid_states()
    before = numba.get_num_threads()
    try:
        numba.set_num_threads(min(2, numba.config.NUMBA_NUM_THREADS))
        two = phaselab.section(henon_heiles, seeds, 20, plane={"x": 0.0})
        numba.set_num_threads(1)
        one = phaselab.section(henon_heiles, seeds, 20, plane={"x": 0.0})
    finally:
        numba.set_num_threads(before)
    assert np.array_equal(two.points, one.points, equal_nan=True)
    assert np.array_equal(two.times, one.times, equal_nan=True)
    assert loops(henon_heiles, "sections").entries   # the loops were reached through a LoopSet
