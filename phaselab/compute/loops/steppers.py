"""One-step integrators, compiled together with a system's kernels.

This file is not imported as a module. Its text is appended by the compute layer to the
module that :func:`phaselab.codegen.compile_system` generates for each system, where the
names ``NDOF``, ``NSTATE``, ``grad_q``, ``grad_p``, ``vector_field``, ``hamiltonian``,
``njit`` and ``np`` are defined. Compiling them in one module lets numba inline the kernels
into the loops and cache both on disk.

Every stepper advances one state ``z`` (shape ``(2n,)``) in place by a step ``h`` and
returns a status code (see ``OK``, ``NOT_CONVERGED``).
"""

OK = 0
LEFT_BOX = 1
NOT_FINITE = 2
NOT_CONVERGED = 3

COMPOSITION = 0  # explicit symplectic splitting H = T(p) + V(q): leapfrog and its compositions
GAUSS = 1        # Gauss-Legendre collocation (implicit midpoint for one stage)
RK4 = 2          # classical Runge-Kutta (not symplectic; reference and Henon's step)


@njit(cache=True, nogil=True)
def composition_step(z, h, prm, weights, gq, gp):
    """Compose drift-kick-drift leapfrog steps of lengths ``weights[k] * h``.

    Adjacent half drifts are merged, so a composition of ``s`` leapfrogs costs ``s`` force
    evaluations (``grad_q``) and ``s + 1`` velocity evaluations (``grad_p``).
    """
    n = NDOF
    s = weights.shape[0]
    c = 0.5 * weights[0] * h
    for k in range(s):
        grad_p(z, prm, gp)
        for i in range(n):
            z[i] += c * gp[i]
        grad_q(z, prm, gq)
        d = weights[k] * h
        for i in range(n):
            z[n + i] -= d * gq[i]
        if k + 1 < s:
            c = 0.5 * (weights[k] + weights[k + 1]) * h
        else:
            c = 0.5 * weights[k] * h
    grad_p(z, prm, gp)
    for i in range(n):
        z[i] += c * gp[i]
    return OK


@njit(cache=True, nogil=True)
def gauss_step(z, h, prm, A, b, tol, maxit, K, Kn, zs):
    """Gauss-Legendre collocation step solved by fixed-point iteration.

    ``K`` holds the stage slopes (shape ``(s, 2n)``). Converged when the largest change of
    ``h * K`` falls below ``tol * (1 + max|z|)``, or when it has stopped shrinking at
    round-off level (100x that). Returns ``NOT_CONVERGED`` otherwise, leaving ``z`` untouched.
    """
    m = NSTATE
    s = b.shape[0]
    vector_field(z, prm, K[0])
    for i in range(1, s):
        for j in range(m):
            K[i, j] = K[0, j]
    scale = 1.0
    for j in range(m):
        a = abs(z[j])
        if a > scale:
            scale = a
    limit = tol * scale
    prev = np.inf
    done = False
    for it in range(maxit):
        for i in range(s):
            for j in range(m):
                acc = 0.0
                for l in range(s):
                    acc += A[i, l] * K[l, j]
                zs[j] = z[j] + h * acc
            vector_field(zs, prm, Kn[i])
        diff = 0.0
        for i in range(s):
            for j in range(m):
                d = abs(Kn[i, j] - K[i, j]) * abs(h)
                if d > diff:
                    diff = d
                K[i, j] = Kn[i, j]
        if not (diff == diff):  # NaN
            return NOT_FINITE
        if diff <= limit:
            done = True
            break
        if diff >= prev and diff <= 100.0 * limit:
            done = True
            break
        prev = diff
    if not done:
        return NOT_CONVERGED
    for j in range(m):
        acc = 0.0
        for i in range(s):
            acc += b[i] * K[i, j]
        z[j] += h * acc
    return OK


@njit(cache=True, nogil=True)
def rk4_step(z, h, prm, k1, k2, k3, k4, zs):
    """Classical fourth-order Runge-Kutta step (not symplectic)."""
    m = NSTATE
    vector_field(z, prm, k1)
    for j in range(m):
        zs[j] = z[j] + 0.5 * h * k1[j]
    vector_field(zs, prm, k2)
    for j in range(m):
        zs[j] = z[j] + 0.5 * h * k2[j]
    vector_field(zs, prm, k3)
    for j in range(m):
        zs[j] = z[j] + h * k3[j]
    vector_field(zs, prm, k4)
    for j in range(m):
        z[j] += h * (k1[j] + 2.0 * k2[j] + 2.0 * k3[j] + k4[j]) / 6.0
    return OK


@njit(cache=True, nogil=True)
def make_work(n_stages):
    """Scratch space for :func:`advance`: rows 0..n_stages-1 stage slopes, then 2*n_stages + 6
    spare rows, each of length NSTATE."""
    return np.zeros((2 * n_stages + 6, NSTATE))


@njit(cache=True, nogil=True)
def advance(z, h, prm, kind, weights, A, b, tol, maxit, work):
    """Advance ``z`` in place by one step of the method ``kind``; returns a status code.

    Parameters
    ----------
    z : ndarray, shape (2n,)
    h : float
        Step (may be negative: every method here runs backwards as well).
    prm : ndarray, shape (n_params,)
    kind : int
        ``COMPOSITION``, ``GAUSS`` or ``RK4``.
    weights : ndarray, shape (s,)
        Leapfrog weights of a composition (``[1.0]`` is the leapfrog itself).
    A, b : ndarray, shapes (s, s) and (s,)
        Gauss-Legendre tableau.
    tol : float
        Relative tolerance of the implicit solve.
    maxit : int
        Most fixed-point iterations of the implicit solve.
    work : ndarray
        From :func:`make_work`.
    """
    if kind == COMPOSITION:
        return composition_step(z, h, prm, weights, work[0, :NDOF], work[1, :NDOF])
    if kind == GAUSS:
        s = b.shape[0]
        return gauss_step(z, h, prm, A, b, tol, maxit, work[:s], work[s:2 * s], work[2 * s])
    n0 = work.shape[0] - 5
    return rk4_step(z, h, prm, work[n0], work[n0 + 1], work[n0 + 2], work[n0 + 3], work[n0 + 4])


@njit(cache=True, nogil=True)
def check_state(z, box_lo, box_hi):
    """``OK``, ``NOT_FINITE`` or ``LEFT_BOX`` for the state ``z``."""
    for j in range(NSTATE):
        v = z[j]
        if not (v == v) or v == np.inf or v == -np.inf:
            return NOT_FINITE
        if v < box_lo[j] or v > box_hi[j]:
            return LEFT_BOX
    return OK


@njit(cache=True, nogil=True, parallel=True)
def run_orbits(Z0, prm, h, n_steps, save_every, kind, weights, A, b, tol, maxit,
               box_lo, box_hi, out_states, out_energy, status, stop_step):
    """Integrate every orbit of ``Z0`` (shape ``(n_orbits, 2n)``) for ``n_steps`` steps,
    in parallel over orbits, saving every ``save_every`` steps.

    ``out_states`` (``(n_orbits, n_saves, 2n)``) and ``out_energy`` (``(n_orbits,
    n_saves)``) must be pre-filled with NaN; sample 0 is the initial state. An orbit that
    leaves the box, goes non-finite or fails an implicit solve is stopped: ``status[o]`` gets
    the code and ``stop_step[o]`` the step number at which it happened.
    """
    n_orb = Z0.shape[0]
    for o in prange(n_orb):
        work = make_work(max(b.shape[0], 1))
        z = Z0[o].copy()
        st = check_state(z, box_lo, box_hi)
        if st != OK:
            status[o] = st
            stop_step[o] = 0
            continue
        for j in range(NSTATE):
            out_states[o, 0, j] = z[j]
        out_energy[o, 0] = hamiltonian(z, prm)
        k = 0
        for step in range(1, n_steps + 1):
            st = advance(z, h, prm, kind, weights, A, b, tol, maxit, work)
            if st == OK:
                st = check_state(z, box_lo, box_hi)
            if st != OK:
                status[o] = st
                stop_step[o] = step
                break
            if step % save_every == 0:
                k += 1
                for j in range(NSTATE):
                    out_states[o, k, j] = z[j]
                out_energy[o, k] = hamiltonian(z, prm)
