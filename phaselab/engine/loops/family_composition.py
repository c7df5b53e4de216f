"""Stepper family ``composition``: compositions of leapfrogs (explicit symplectic splitting of
a separable H = T(p) + V(q)).

Loop text. Every assembled module holds exactly one stepper family file (see
:mod:`phaselab.engine.loop_source`), which defines the two functions the loops step with:

``advance(kern, z, h, prm, kind, weights, A, b, tol, maxit, work)``
    Advance ``z`` (shape ``(2n,)``) in place by one step ``h`` (may be negative); returns a
    status code. ``weights`` (s,) are the leapfrog weights of a composition (``[1.0]`` is
    the leapfrog itself); ``A``, ``b`` ((s, s), (s,)) the Gauss-Legendre tableau, ``tol`` and
    ``maxit`` the implicit solve's relative tolerance and most iterations; ``work`` comes
    from ``make_work``. ``kind`` is the family's stepper kind; what another family needs is
    passed and unused.
``advance_tangent(kern, z, V, h, prm, kind, weights, A, b, tol, maxit, work, jac)``
    The same step together with its exact tangent map on the vectors ``V`` (shape
    ``(2n, k)``); ``jac`` is scratch of shape ``(2n, 2n)``. ``V`` is left unchanged when the
    step fails.

A module compiles only its own family's steppers, so a first call waits for the method it
runs and no other.
"""

REQUIRES = ("steppers",)
PROVIDES = ()


@njit(cache=True, nogil=True)
def advance(kern, z, h, prm, kind, weights, A, b, tol, maxit, work):
    """One step of a composition of leapfrogs (``kind`` is ``COMPOSITION``)."""
    n = nstate(z) // 2
    return composition_step(kern, z, h, prm, weights, work[0, :n], work[1, :n])


@njit(cache=True, nogil=True)
def advance_tangent(kern, z, V, h, prm, kind, weights, A, b, tol, maxit, work, jac):
    """One step of a composition of leapfrogs with its exact tangent map."""
    n = nstate(z) // 2
    # the first n*n entries of the (C-ordered) scratch matrix serve as an n x n block
    hess = jac.reshape(jac.shape[0] * jac.shape[1])[:n * n].reshape((n, n))
    return composition_tangent_step(kern, z, V, h, prm, weights, work[0, :n], work[1, :n], hess)
