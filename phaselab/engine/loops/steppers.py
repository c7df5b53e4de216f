"""One-step integrators and their exact tangent maps, the ensemble trajectory loop, and a
batch evaluator per kernel.

Loop text: never imported on its own. :mod:`phaselab.engine.compiled` assembles it into a
module whose header defines the status codes and stepper kinds, ``np``, ``math``, ``njit``,
``prange``, and the kernel access functions ``hamiltonian(kern, z, prm)``,
``grad_q(kern, z, prm, out)``, ``grad_p``, ``vector_field``, ``jacobian``, ``map_step``,
``map_jacobian`` and ``nstate(z)``. ``kern`` is the system's compiled kernel: a function
pointer in the generic module (compiled once per machine), unused in a system's inlined
module (where the access functions call the system's kernels directly).

Every stepper advances one state ``z`` (shape ``(2n,)``) in place by a step ``h`` and
returns a status code. The loops step with ``advance`` and ``advance_tangent``, defined by the
stepper family file the module is assembled with (``family_*.py``: one family per module, so
a module compiles only the steppers of the method it runs).
"""

REQUIRES = ()
PROVIDES = ("run_orbits", "evaluate_hamiltonian", "evaluate_grad_q", "evaluate_grad_p", "evaluate_vector_field",
            "evaluate_map_step", "evaluate_jacobian", "evaluate_map_jacobian", "step_matrix")
ORBITS = {
    "run_orbits": ("Z0", "out_states", "out_energy", "status", "stop_step"),
}


@njit(cache=True, nogil=True)
def composition_step(kern, z, h, prm, weights, gq, gp):
    """Compose drift-kick-drift leapfrog steps of lengths ``weights[k] * h``.

    Adjacent half drifts are merged, so a composition of ``s`` leapfrogs costs ``s`` force
    evaluations (``grad_q``) and ``s + 1`` velocity evaluations (``grad_p``).
    """
    n = nstate(z) // 2
    s = weights.shape[0]
    c = 0.5 * weights[0] * h
    for k in range(s):
        grad_p(kern, z, prm, gp)
        for i in range(n):
            z[i] += c * gp[i]
        grad_q(kern, z, prm, gq)
        d = weights[k] * h
        for i in range(n):
            z[n + i] -= d * gq[i]
        if k + 1 < s:
            c = 0.5 * (weights[k] + weights[k + 1]) * h
        else:
            c = 0.5 * weights[k] * h
    grad_p(kern, z, prm, gp)
    for i in range(n):
        z[i] += c * gp[i]
    return OK


@njit(cache=True, nogil=True)
def gauss_step(kern, z, h, prm, A, b, tol, maxit, K, Kn, zs):
    """Gauss-Legendre collocation step solved by fixed-point iteration.

    ``K`` holds the stage slopes (shape ``(s, 2n)``). Converged when the largest change of
    ``h * K`` falls below ``tol * (1 + max|z|)``, or when it has stopped shrinking at
    round-off level (100x that). Returns ``NOT_CONVERGED`` otherwise (also when the iteration
    diverges to NaN), leaving ``z`` untouched.
    """
    m = nstate(z)
    s = b.shape[0]
    vector_field(kern, z, prm, K[0])
    if check_values(K[0]) != OK:  # a singularity of the field at the state itself
        return SINGULAR
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
            vector_field(kern, zs, prm, Kn[i])
        diff = 0.0
        bad = False
        for i in range(s):
            for j in range(m):
                d = abs(Kn[i, j] - K[i, j]) * abs(h)
                if d > diff:
                    diff = d
                elif not (d == d):  # NaN (max() would skip it)
                    bad = True
                K[i, j] = Kn[i, j]
        if bad or diff == np.inf:  # the iteration diverged; the state itself is still finite
            return NOT_CONVERGED
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
def rk4_step(kern, z, h, prm, k1, k2, k3, k4, zs):
    """Classical fourth-order Runge-Kutta step (not symplectic)."""
    m = nstate(z)
    vector_field(kern, z, prm, k1)
    for j in range(m):
        zs[j] = z[j] + 0.5 * h * k1[j]
    vector_field(kern, zs, prm, k2)
    for j in range(m):
        zs[j] = z[j] + 0.5 * h * k2[j]
    vector_field(kern, zs, prm, k3)
    for j in range(m):
        zs[j] = z[j] + h * k3[j]
    vector_field(kern, zs, prm, k4)
    for j in range(m):
        z[j] += h * (k1[j] + 2.0 * k2[j] + 2.0 * k3[j] + k4[j]) / 6.0
    return OK


@njit(cache=True, nogil=True)
def make_work(n_stages, m):
    """Scratch space for :func:`advance`: rows 0..n_stages-1 stage slopes, then 2*n_stages + 6
    spare rows, each of length ``m`` (the state size)."""
    return np.zeros((2 * n_stages + 6, m))


@njit(cache=True, nogil=True)
def check_value(v):
    """``OK`` for a finite number, else ``SINGULAR`` (a kernel value at a singularity:
    kernels divide as IEEE arithmetic does, so x / 0 gives inf or nan)."""
    if v == v and v != np.inf and v != -np.inf:
        return OK
    return SINGULAR


@njit(cache=True, nogil=True)
def check_values(a):
    """:func:`check_value` for every entry of the 1-D or 2-D array ``a``."""
    flat = a.ravel()
    for j in range(flat.shape[0]):
        if check_value(flat[j]) != OK:
            return SINGULAR
    return OK


@njit(cache=True, nogil=True)
def check_state(z, box_lo, box_hi):
    """``OK``, ``NOT_FINITE`` or ``LEFT_BOX`` for the state ``z``."""
    for j in range(z.shape[0]):
        v = z[j]
        if not (v == v) or v == np.inf or v == -np.inf:
            return NOT_FINITE
        if v < box_lo[j] or v > box_hi[j]:
            return LEFT_BOX
    return OK


@njit(cache=True, nogil=True)
def run_orbits(kern, Z0, prm, h, n_steps, save_every, kind, weights, A, b, tol, maxit,
               box_lo, box_hi, out_states, out_energy, status, stop_step):
    """Integrate every orbit of ``Z0`` (shape ``(n_orbits, 2n)``) for ``n_steps`` steps,
    saving every ``save_every`` steps.

    ``out_states`` (``(n_orbits, n_saves, 2n)``) and ``out_energy`` (``(n_orbits,
    n_saves)``) must be pre-filled with NaN; sample 0 is the initial state. When
    ``n_steps`` is not a multiple of ``save_every`` and the arrays have room for one more
    sample (``n_saves = n_steps // save_every + 2``), the final state is saved there too. An
    orbit that leaves the box, goes non-finite or fails an implicit solve is stopped:
    ``status[o]`` gets the code and ``stop_step[o]`` the step number at which it happened;
    an orbit whose energy is not finite (a singularity of H) gets ``SINGULAR``.
    """
    n_orb = Z0.shape[0]
    m = Z0.shape[1]
    for o in range(n_orb):
        work = make_work(max(b.shape[0], 1), m)
        z = Z0[o].copy()
        st = check_state(z, box_lo, box_hi)
        if st != OK:
            status[o] = st
            stop_step[o] = 0
            continue
        for j in range(m):
            out_states[o, 0, j] = z[j]
        out_energy[o, 0] = hamiltonian(kern, z, prm)
        if check_value(out_energy[o, 0]) != OK:
            status[o] = SINGULAR
            stop_step[o] = 0
            continue
        k = 0
        for step in range(1, n_steps + 1):
            st = advance(kern, z, h, prm, kind, weights, A, b, tol, maxit, work)
            if st == OK:
                st = check_state(z, box_lo, box_hi)
            if st != OK:
                status[o] = st
                stop_step[o] = step
                break
            if step % save_every == 0 or (step == n_steps and k + 1 < out_states.shape[1]):
                k += 1
                for j in range(m):
                    out_states[o, k, j] = z[j]
                out_energy[o, k] = hamiltonian(kern, z, prm)
                if check_value(out_energy[o, k]) != OK:
                    status[o] = SINGULAR
                    stop_step[o] = step
                    break


# One entry point per kernel, so that a first evaluation compiles only the kernel access it
# uses. ``out`` has shape ``(n_points, width)``: H goes to ``out[i, 0]``; dH/dq and dH/dp to
# ``out[i, :n]``; the vector field and a map's step to ``out[i, :2n]``; a Jacobian, row-major,
# to ``out[i, :(2n)^2]``.


@njit(cache=True, nogil=True)
def evaluate_hamiltonian(kern, Z, prm, out):
    """H at every row of ``Z`` (shape ``(n_points, 2n)``) into ``out[i, 0]``."""
    for i in range(Z.shape[0]):
        out[i, 0] = hamiltonian(kern, Z[i], prm)


@njit(cache=True, nogil=True)
def evaluate_grad_q(kern, Z, prm, out):
    """dH/dq at every row of ``Z`` into ``out[i, :n]``."""
    n = Z.shape[1] // 2
    for i in range(Z.shape[0]):
        grad_q(kern, Z[i], prm, out[i, :n])


@njit(cache=True, nogil=True)
def evaluate_grad_p(kern, Z, prm, out):
    """dH/dp at every row of ``Z`` into ``out[i, :n]``."""
    n = Z.shape[1] // 2
    for i in range(Z.shape[0]):
        grad_p(kern, Z[i], prm, out[i, :n])


@njit(cache=True, nogil=True)
def evaluate_vector_field(kern, Z, prm, out):
    """The vector field at every row of ``Z`` into ``out[i, :2n]``."""
    m = Z.shape[1]
    for i in range(Z.shape[0]):
        vector_field(kern, Z[i], prm, out[i, :m])


@njit(cache=True, nogil=True)
def evaluate_map_step(kern, Z, prm, out):
    """A map's step at every row of ``Z`` into ``out[i, :2n]``."""
    m = Z.shape[1]
    for i in range(Z.shape[0]):
        map_step(kern, Z[i], prm, out[i, :m])


@njit(cache=True, nogil=True)
def evaluate_jacobian(kern, Z, prm, out):
    """The Jacobian of the vector field at every row of ``Z``, row-major, into ``out[i, :(2n)^2]``."""
    m = Z.shape[1]
    jac = np.empty((m, m))
    for i in range(Z.shape[0]):
        jacobian(kern, Z[i], prm, jac)
        for r in range(m):
            for c in range(m):
                out[i, r * m + c] = jac[r, c]


@njit(cache=True, nogil=True)
def evaluate_map_jacobian(kern, Z, prm, out):
    """A map's Jacobian at every row of ``Z``, row-major, into ``out[i, :(2n)^2]``."""
    m = Z.shape[1]
    jac = np.empty((m, m))
    for i in range(Z.shape[0]):
        map_jacobian(kern, Z[i], prm, jac)
        for r in range(m):
            for c in range(m):
                out[i, r * m + c] = jac[r, c]


# --------------------------------------------------------------------------- tangent maps
#
# The tangent steppers advance a state ``z`` and a block of tangent vectors ``V`` (shape
# ``(2n, k)``, one vector per column) by the exact derivative of the same discrete map that
# ``advance`` applies: V <- (d Phi_h / d z) V. With ``V`` the identity they give the Jacobian
# of one step, whose symplecticity can then be checked to round-off; the chaos indicators
# and Newton's method for periodic orbits use them.


@njit(cache=True, nogil=True)
def drift_tangent(kern, z, V, c, prm, gp, hp):
    """q += c dH/dp(p) and its tangent dq += c (d2H/dp2) dp (separable H); ``hp`` is n x n
    scratch."""
    n = nstate(z) // 2
    k = V.shape[1]
    hess_pp(kern, z, prm, hp)
    grad_p(kern, z, prm, gp)
    for i in range(n):
        z[i] += c * gp[i]
    for col in range(k):
        for i in range(n):
            acc = 0.0
            for j in range(n):
                acc += hp[i, j] * V[n + j, col]
            V[i, col] += c * acc


@njit(cache=True, nogil=True)
def composition_tangent_step(kern, z, V, h, prm, weights, gq, gp, hess):
    """:func:`composition_step` together with its exact tangent map; ``hess`` is n x n
    scratch for the blocks d2H/dp2 and d2H/dq2."""
    n = nstate(z) // 2
    k = V.shape[1]
    s = weights.shape[0]
    c = 0.5 * weights[0] * h
    for st in range(s):
        drift_tangent(kern, z, V, c, prm, gp, hess)
        hess_qq(kern, z, prm, hess)
        grad_q(kern, z, prm, gq)
        d = weights[st] * h
        for i in range(n):
            z[n + i] -= d * gq[i]
        # dp -= d (d2H/dq2) dq
        for col in range(k):
            for i in range(n):
                acc = 0.0
                for j in range(n):
                    acc += hess[i, j] * V[j, col]
                V[n + i, col] -= d * acc
        if st + 1 < s:
            c = 0.5 * (weights[st] + weights[st + 1]) * h
        else:
            c = 0.5 * weights[st] * h
    drift_tangent(kern, z, V, c, prm, gp, hess)
    return OK


@njit(cache=True, nogil=True)
def gauss_tangent(kern, z_old, V, h, prm, A, b, K):
    """Tangent of a converged Gauss-Legendre step from ``z_old`` with stage slopes ``K``.

    The stages Z_i = z + h sum_l A_il f(Z_l) differentiate to the linear system
    (I - h A (x) J(Z)) W = 1 (x) V, solved directly; then V <- V + h sum_i b_i J(Z_i) W_i.
    Returns ``SINGULAR`` (``V`` unchanged) when a stage Jacobian is not finite.
    """
    m = nstate(z_old)
    s = b.shape[0]
    k = V.shape[1]
    Js = np.empty((s, m, m))
    zs = np.empty(m)
    for i in range(s):
        for j in range(m):
            acc = 0.0
            for l in range(s):
                acc += A[i, l] * K[l, j]
            zs[j] = z_old[j] + h * acc
        jacobian(kern, zs, prm, Js[i])
        if check_values(Js[i]) != OK:
            return SINGULAR
    S = s * m
    M = np.zeros((S, S))
    R = np.empty((S, k))
    for i in range(s):
        for l in range(s):
            a = h * A[i, l]
            for r in range(m):
                for c in range(m):
                    M[i * m + r, l * m + c] = -a * Js[l, r, c]
        for r in range(m):
            M[i * m + r, i * m + r] += 1.0
            for col in range(k):
                R[i * m + r, col] = V[r, col]
    W = np.linalg.solve(M, R)
    for col in range(k):
        for r in range(m):
            acc = 0.0
            for i in range(s):
                inner = 0.0
                for c in range(m):
                    inner += Js[i, r, c] * W[i * m + c, col]
                acc += b[i] * inner
            V[r, col] += h * acc
    return OK


@njit(cache=True, nogil=True)
def rk4_tangent_step(kern, z, V, h, prm):
    """:func:`rk4_step` together with its exact tangent map."""
    m = nstate(z)
    k = V.shape[1]
    ks = np.empty((4, m))
    dks = np.empty((4, m, k))
    zs = z.copy()
    Vs = V.copy()
    jac = np.empty((m, m))
    frac = (0.5, 0.5, 1.0)
    for st in range(4):
        vector_field(kern, zs, prm, ks[st])
        jacobian(kern, zs, prm, jac)
        for r in range(m):
            for col in range(k):
                acc = 0.0
                for c in range(m):
                    acc += jac[r, c] * Vs[c, col]
                dks[st, r, col] = acc
        if st < 3:
            f = frac[st] * h
            for r in range(m):
                zs[r] = z[r] + f * ks[st, r]
                for col in range(k):
                    Vs[r, col] = V[r, col] + f * dks[st, r, col]
    for r in range(m):
        z[r] += h * (ks[0, r] + 2.0 * ks[1, r] + 2.0 * ks[2, r] + ks[3, r]) / 6.0
        for col in range(k):
            V[r, col] += h * (dks[0, r, col] + 2.0 * dks[1, r, col] + 2.0 * dks[2, r, col]
                              + dks[3, r, col]) / 6.0
    return OK


@njit(cache=True, nogil=True)
def step_matrix(kern, z, h, prm, kind, weights, A, b, tol, maxit, out):
    """The Jacobian of one step from ``z`` into ``out`` (shape ``(2n, 2n)``); ``z`` is not
    modified. Returns the status code of the step."""
    m = z.shape[0]
    work = make_work(max(b.shape[0], 1), m)
    zz = z.copy()
    for r in range(m):
        for c in range(m):
            out[r, c] = 1.0 if r == c else 0.0
    return advance_tangent(kern, zz, out, h, prm, kind, weights, A, b, tol, maxit, work,
                           np.empty((m, m)))
