"""Return maps with their exact derivatives, for Newton's method on periodic orbits.

Loop text (see ``steppers.py`` for what the assembled module provides); ``advance_tangent``,
``make_work``, ``check_state`` and ``check_values`` come from ``steppers.py``. Names
defined here start with ``periodic_``.

Every entry point takes a batch of states and returns, per state, the image under the
return map (the k-th crossing of a plane, k periods of a drive, k iterates of a map) and
the Jacobian of that image with respect to the starting state: the product of the exact
tangent maps of the numerical steps (the same ones the chaos indicators use), so Newton's
method sees the derivative of the map it actually solves.

The crossing of a plane is refined by Henon's step (see ``sections.py``) with the tangent
carried along: in ``s = z[k]`` the orbit obeys dz/ds = g(z) = f(z) / f_k(z), whose
variational equation dW/ds = Dg W with Dg = J / f_k - g (J_k,:) / f_k is integrated by the
same RK4 sub-steps; since the length ``ds = value - z_k`` of that integration depends on
the starting point, the derivative gains ``- g(z_out) (W_start)_k,:``, which makes row k of
the result vanish (the image lies on the plane whatever the start).
"""

REQUIRES = ("steppers",)
PROVIDES = ("periodic_plane_return", "periodic_strobe_return", "periodic_map_return",
            "periodic_map_inverse")
ORBITS = {
    "periodic_plane_return": ("Z0", "out_state", "out_jac", "out_time", "status"),
    "periodic_strobe_return": ("X0", "out_state", "out_jac", "status"),
    "periodic_map_return": ("Z0", "out_state", "out_jac", "status"),
    "periodic_map_inverse": ("Y", "out_state", "status"),
}


@njit(cache=True, nogil=True, inline="always")
def periodic_identity(m):
    """The identity matrix of shape (m, m) (written out: ``np.eye`` costs a compile of its own)."""
    W = np.zeros((m, m))
    for r in range(m):
        W[r, r] = 1.0
    return W


@njit(cache=True, nogil=True, inline="always")
def periodic_henon_slope(kern, z, W, k, prm, f, jac, gz, gW):
    """gz = f / f_k and gW = Dg W at ``z``; returns 1 / f_k (dt/ds)."""
    m = z.shape[0]
    vector_field(kern, z, prm, f)
    jacobian(kern, z, prm, jac)
    inv = 1.0 / f[k]
    for r in range(m):
        gz[r] = f[r] * inv
    cols = W.shape[1]
    for c in range(cols):
        jk = 0.0
        for l in range(m):
            jk += jac[k, l] * W[l, c]
        for r in range(m):
            acc = 0.0
            for l in range(m):
                acc += jac[r, l] * W[l, c]
            gW[r, c] = (acc - gz[r] * jk) * inv
    return inv


@njit(cache=True, nogil=True)
def periodic_henon_refine(kern, z, W, t, k, value, prm, n_sub, out, Wout):
    """Integrate from ``z`` (tangent block ``W``) to the plane ``z[k] = value`` by ``n_sub``
    RK4 sub-steps in ``s = z[k]``, with the tangent; writes the crossing into ``out`` and
    its derivative into ``Wout``; returns the crossing time."""
    m = z.shape[0]
    cols = W.shape[1]
    f = np.empty(m)
    jac = np.empty((m, m))
    ks = np.empty((4, m))
    kW = np.empty((4, m, cols))
    kt = np.empty(4)
    zs = np.empty(m)
    Ws = np.empty((m, cols))
    for r in range(m):
        out[r] = z[r]
        for c in range(cols):
            Wout[r, c] = W[r, c]
    ds = (value - z[k]) / n_sub
    for step in range(n_sub):
        for st in range(4):
            if st == 0:
                for r in range(m):
                    zs[r] = out[r]
                    for c in range(cols):
                        Ws[r, c] = Wout[r, c]
            else:
                frac = 1.0 if st == 3 else 0.5
                for r in range(m):
                    zs[r] = out[r] + frac * ds * ks[st - 1, r]
                    for c in range(cols):
                        Ws[r, c] = Wout[r, c] + frac * ds * kW[st - 1, r, c]
            kt[st] = periodic_henon_slope(kern, zs, Ws, k, prm, f, jac, ks[st], kW[st])
        for r in range(m):
            out[r] += ds * (ks[0, r] + 2.0 * ks[1, r] + 2.0 * ks[2, r] + ks[3, r]) / 6.0
            for c in range(cols):
                Wout[r, c] += ds * (kW[0, r, c] + 2.0 * kW[1, r, c] + 2.0 * kW[2, r, c] + kW[3, r, c]) / 6.0
        t += ds * (kt[0] + 2.0 * kt[1] + 2.0 * kt[2] + kt[3]) / 6.0
    out[k] = value
    # the length of the s-integration depends on the start: d out = ... - g(out) d z_k(start)
    vector_field(kern, out, prm, f)
    inv = 1.0 / f[k]
    for c in range(cols):
        wk = W[k, c]
        for r in range(m):
            Wout[r, c] -= f[r] * inv * wk
    return t


@njit(cache=True, nogil=True)
def periodic_plane_return(kern, Z0, prm, h, max_steps, k, value, direction, n_cross, kind, weights,
                          A, b, tol, maxit, box_lo, box_hi, out_state, out_jac, out_time, status):
    """The ``n_cross``-th crossing of ``z[k] = value`` (in ``direction``) of every orbit of
    ``Z0`` and its derivative with respect to the starting state.

    ``out_state`` (n, m), ``out_jac`` (n, m, m), ``out_time`` (n,) and ``status`` (n,) receive
    the crossing state, d(crossing)/d(start), the crossing time and the status (``OK``,
    ``TIME_LIMIT`` when fewer crossings came within ``max_steps`` steps, or what stopped
    the orbit).
    """
    n_orb = Z0.shape[0]
    m = Z0.shape[1]
    for o in range(n_orb):
        work = make_work(max(b.shape[0], 1), m)
        jac = np.zeros((m, m))
        z = Z0[o].copy()
        W = periodic_identity(m)
        zp = np.empty(m)
        Wp = np.empty((m, m))
        st = check_state(z, box_lo, box_hi)
        if st != OK:
            status[o] = st
            continue
        g = direction * (z[k] - value)
        count = 0
        st = TIME_LIMIT
        for step in range(1, max_steps + 1):
            for r in range(m):
                zp[r] = z[r]
                for c in range(m):
                    Wp[r, c] = W[r, c]
            s = advance_tangent(kern, z, W, h, prm, kind, weights, A, b, tol, maxit, work, jac)
            if s == OK:
                s = check_state(z, box_lo, box_hi)
            if s != OK:
                st = s
                break
            g_prev = g
            g = direction * (z[k] - value)
            if g_prev < 0.0 and g >= 0.0:
                count += 1
                if count == n_cross:
                    # refine from the nearer end of the step, as the section loop does
                    if -g_prev < g:
                        t = periodic_henon_refine(kern, zp, Wp, (step - 1) * h, k, value, prm,
                                                  PERIODIC_REFINE_SUBSTEPS, out_state[o], out_jac[o])
                    else:
                        t = periodic_henon_refine(kern, z, W, step * h, k, value, prm,
                                                  PERIODIC_REFINE_SUBSTEPS, out_state[o], out_jac[o])
                    out_time[o] = t
                    st = check_state(out_state[o], box_lo, box_hi)
                    if st == OK:
                        st = check_values(out_jac[o])
                    break
        status[o] = st


@njit(cache=True, nogil=True)
def periodic_strobe_return(kern, X0, prm, h, n_steps, kind, weights, A, b, tol, maxit, box_lo, box_hi,
                           out_state, out_jac, status):
    """The state after ``n_steps`` steps (whole drive periods) of every extended state of
    ``X0`` and its derivative with respect to the start (shapes as for
    :func:`periodic_plane_return`)."""
    n_orb = X0.shape[0]
    m = X0.shape[1]
    for o in range(n_orb):
        work = make_work(max(b.shape[0], 1), m)
        jac = np.zeros((m, m))
        z = X0[o].copy()
        W = periodic_identity(m)
        st = check_state(z, box_lo, box_hi)
        if st == OK:
            for step in range(n_steps):
                st = advance_tangent(kern, z, W, h, prm, kind, weights, A, b, tol, maxit, work, jac)
                if st == OK:
                    st = check_state(z, box_lo, box_hi)
                if st != OK:
                    break
        if st == OK:
            st = check_values(W)
        if st == OK:
            for r in range(m):
                out_state[o, r] = z[r]
                for c in range(m):
                    out_jac[o, r, c] = W[r, c]
        status[o] = st


@njit(cache=True, nogil=True)
def periodic_map_return(kern, Z0, prm, n_iter, box_lo, box_hi, out_state, out_jac, status):
    """``n_iter`` unwrapped iterates of a map from every row of ``Z0`` and the Jacobian of
    the composed map (shapes as for :func:`periodic_plane_return`)."""
    n_orb = Z0.shape[0]
    m = Z0.shape[1]
    for o in range(n_orb):
        jac = np.zeros((m, m))
        z = Z0[o].copy()
        zn = np.empty(m)
        W = periodic_identity(m)
        Wn = np.empty((m, m))
        st = check_state(z, box_lo, box_hi)
        if st == OK:
            for it in range(n_iter):
                map_jacobian(kern, z, prm, jac)
                map_step(kern, z, prm, zn)
                for r in range(m):
                    for c in range(m):
                        acc = 0.0
                        for l in range(m):
                            acc += jac[r, l] * W[l, c]
                        Wn[r, c] = acc
                for r in range(m):
                    z[r] = zn[r]
                    for c in range(m):
                        W[r, c] = Wn[r, c]
                st = check_state(z, box_lo, box_hi)
                if st != OK:
                    break
        if st == OK:
            st = check_values(W)
        if st == OK:
            for r in range(m):
                out_state[o, r] = z[r]
                for c in range(m):
                    out_jac[o, r, c] = W[r, c]
        status[o] = st


@njit(cache=True, nogil=True)
def periodic_map_inverse(kern, Y, prm, tol, maxit, out_state, status):
    """Preimages under a map: for every row ``y`` of ``Y`` the ``x`` with map(x) = y, by
    Newton's method from ``x = 2 y - map(y)`` (exact for a translation). ``status`` is
    ``NOT_CONVERGED`` where ``maxit`` iterations do not bring the residual below ``tol``
    times (1 + |y|)."""
    n_orb = Y.shape[0]
    m = Y.shape[1]
    for o in range(n_orb):
        jac = np.zeros((m, m))
        fx = np.empty(m)
        y = Y[o]
        x = np.empty(m)
        map_step(kern, y, prm, fx)
        scale = 1.0
        for r in range(m):
            x[r] = 2.0 * y[r] - fx[r]
            if abs(y[r]) > scale:
                scale = abs(y[r])
        st = NOT_CONVERGED
        for it in range(maxit):
            map_step(kern, x, prm, fx)
            res = 0.0
            for r in range(m):
                fx[r] -= y[r]
                if abs(fx[r]) > res:
                    res = abs(fx[r])
            if not (res == res):
                st = NOT_FINITE
                break
            if res <= tol * scale:
                st = OK
                break
            map_jacobian(kern, x, prm, jac)
            if check_values(jac) != OK:  # np.linalg.solve would raise
                st = SINGULAR
                break
            dx = np.linalg.solve(jac, fx)
            for r in range(m):
                x[r] -= dx[r]
        for r in range(m):
            out_state[o, r] = x[r]
        status[o] = st
