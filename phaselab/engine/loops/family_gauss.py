"""Stepper family ``gauss``: Gauss-Legendre collocation (implicit midpoint for one stage),
symplectic for any H.

Loop text; ``advance`` and ``advance_tangent`` as described in ``family_composition.py``.
"""

REQUIRES = ("steppers",)
PROVIDES = ()


@njit(cache=True, nogil=True)
def advance(kern, z, h, prm, kind, weights, A, b, tol, maxit, work):
    """One Gauss-Legendre step solved by fixed-point iteration (``kind`` is ``GAUSS``)."""
    s = b.shape[0]
    return gauss_step(kern, z, h, prm, A, b, tol, maxit, work[:s], work[s:2 * s], work[2 * s])


@njit(cache=True, nogil=True)
def advance_tangent(kern, z, V, h, prm, kind, weights, A, b, tol, maxit, work, jac):
    """One Gauss-Legendre step with the exact tangent map of the converged step."""
    z_old = z.copy()
    st = advance(kern, z, h, prm, kind, weights, A, b, tol, maxit, work)
    if st == OK:
        st = gauss_tangent(kern, z_old, V, h, prm, A, b, work[:b.shape[0]])
    return st
