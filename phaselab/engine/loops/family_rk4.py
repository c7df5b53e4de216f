"""Stepper family ``rk4``: the classical fourth-order Runge-Kutta method (not symplectic).

Loop text; ``advance`` and ``advance_tangent`` as described in ``family_composition.py``.
"""

REQUIRES = ("steppers",)
PROVIDES = ()


@njit(cache=True, nogil=True)
def advance(kern, z, h, prm, kind, weights, A, b, tol, maxit, work):
    """One classical Runge-Kutta step (``kind`` is ``RK4``)."""
    n0 = work.shape[0] - 5
    return rk4_step(kern, z, h, prm, work[n0], work[n0 + 1], work[n0 + 2], work[n0 + 3], work[n0 + 4])


@njit(cache=True, nogil=True)
def advance_tangent(kern, z, V, h, prm, kind, weights, A, b, tol, maxit, work, jac):
    """One classical Runge-Kutta step with its exact tangent map."""
    return rk4_tangent_step(kern, z, V, h, prm)
