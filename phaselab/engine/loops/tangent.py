"""Chaos indicators along orbits: Benettin's largest Lyapunov exponent, MEGNO, FLI, SALI.

Loop text (see ``steppers.py`` for what the assembled module provides); ``advance_tangent``,
``make_work`` and ``check_state`` come from ``steppers.py``. Names defined here start with
``tangent_``.

Deviation vectors are propagated by ``advance_tangent``, the exact derivative of the
numerical step, so the tangent map is symplectic whenever the step is. One deviation vector
serves the Lyapunov exponent, MEGNO and FLI; SALI needs two (``W0.shape[2] == 2``).
"""

REQUIRES = ("steppers",)
PROVIDES = ("tangent_flow_indicators", "tangent_composition_indicators", "tangent_map_indicators")
ORBITS = {
    "tangent_flow_indicators": ("Z0", "W0", "final", "history", "status", "stop_step"),
    "tangent_composition_indicators": ("Z0", "W0", "final", "history", "status", "stop_step"),
    "tangent_map_indicators": ("Z0", "W0", "final", "history", "status", "stop_step"),
}


@njit(cache=True, nogil=True, inline="always")
def tangent_kick(kern, z, v0, v1, gq, hq, d, k, prm):
    """Kick p -= d dH/dq and its tangent v_p -= d (d2H/dq2) v_q for the one or two vectors
    (``k``); both composition loops step their kicks with it."""
    n = gq.shape[0]
    hess_qq(kern, z, prm, hq)
    grad_q(kern, z, prm, gq)
    for a in range(n):
        z[n + a] -= d * gq[a]
    for a in range(n):
        t = hq[a, 0] * v0[0]
        for b in range(1, n):
            t += hq[a, b] * v0[b]
        v0[n + a] -= d * t
    if k > 1:
        for a in range(n):
            t = hq[a, 0] * v1[0]
            for b in range(1, n):
                t += hq[a, b] * v1[b]
            v1[n + a] -= d * t


@njit(cache=True, nogil=True)
def tangent_norm(W, col):
    acc = 0.0
    for j in range(W.shape[0]):
        acc += W[j, col] * W[j, col]
    return math.sqrt(acc)


@njit(cache=True, nogil=True)
def tangent_normalise(W):
    for col in range(W.shape[1]):
        g = tangent_norm(W, col)
        for j in range(W.shape[0]):
            W[j, col] /= g


@njit(cache=True, nogil=True)
def tangent_usable(g):
    """Whether a deviation vector of length ``g`` can be renormalised (positive and finite;
    a singular Jacobian along the orbit makes it zero, inf or nan)."""
    return g > 0.0 and g < np.inf


@njit(cache=True, nogil=True)
def tangent_update(W, t, h, acc):
    """Renormalise the deviation vectors after a step ending at time ``t`` and update the
    running indicators in ``acc`` = [log_sum, fli, y_int, y_mean, sali]. Returns ``OK``, or
    ``SINGULAR`` (nothing changed) when a deviation vector is zero or not finite."""
    g = tangent_norm(W, 0)
    g2 = tangent_norm(W, 1) if W.shape[1] > 1 else 1.0
    if not (tangent_usable(g) and tangent_usable(g2)):
        return SINGULAR
    growth = math.log(g)
    acc[0] += growth
    if acc[0] > acc[1]:
        acc[1] = acc[0]
    # MEGNO: Y(t) = (2/t) int_0^t s d(ln|w|)/ds ds, averaged in time
    acc[2] += 2.0 * (t - 0.5 * h) * growth
    y_now = acc[2] / t
    acc[3] += (y_now - acc[3]) * h / t
    for j in range(W.shape[0]):
        W[j, 0] /= g
    if W.shape[1] > 1:
        tangent_second(W, g2, acc)
    return OK


@njit(cache=True, nogil=True)
def tangent_second(W, g2, acc):
    """Renormalise the second deviation vector (of length ``g2``) and put SALI into ``acc[4]``."""
    for j in range(W.shape[0]):
        W[j, 1] /= g2
    plus = 0.0
    minus = 0.0
    for j in range(W.shape[0]):
        plus += (W[j, 0] + W[j, 1]) ** 2
        minus += (W[j, 0] - W[j, 1]) ** 2
    acc[4] = min(math.sqrt(plus), math.sqrt(minus))


@njit(cache=True, nogil=True)
def tangent_store(o, t, acc, out):
    """Write [lyapunov, megno, fli, sali] at time ``t`` into ``out[o]`` (shape (4,))."""
    out[o, 0] = acc[0] / t
    out[o, 1] = acc[3]
    out[o, 2] = acc[1]
    out[o, 3] = acc[4]


@njit(cache=True, nogil=True)
def tangent_flow_indicators(kern, Z0, W0, prm, h, n_steps, record_every, kind, weights, A, b, tol,
                            maxit, box_lo, box_hi, final, history, status, stop_step):
    """Benettin's largest Lyapunov exponent, MEGNO, FLI and SALI along every orbit of a flow.

    ``W0`` has shape ``(n_orbits, 2n, k)`` with ``k = 1`` or ``2`` (SALI needs two vectors;
    with one it stays NaN). The deviation vectors are renormalised after every step.
    ``final`` (``(n_orbits, 4)``, NaN-filled) receives [lyapunov, megno, fli, sali] at the
    last step each orbit completed. With ``record_every > 0`` running values are also
    recorded into ``history`` (shape ``(n_orbits, n_records, 4)``, NaN-filled) every
    ``record_every`` steps; record ``r`` is taken at time ``(r + 1) * record_every * h``.
    """
    n_orb = Z0.shape[0]
    m = Z0.shape[1]
    for o in range(n_orb):
        work = make_work(max(b.shape[0], 1), m)
        jac = np.zeros((m, m))
        acc = np.zeros(5)
        acc[4] = np.nan
        z = Z0[o].copy()
        W = W0[o].copy()
        tangent_normalise(W)
        st = check_state(z, box_lo, box_hi)
        if st != OK:
            status[o] = st
            stop_step[o] = 0
            continue
        rec = 0
        done = 0
        for step in range(1, n_steps + 1):
            st = advance_tangent(kern, z, W, h, prm, kind, weights, A, b, tol, maxit, work, jac)
            if st == OK:
                st = check_state(z, box_lo, box_hi)
            if st == OK:
                st = tangent_update(W, step * h, h, acc)
            if st != OK:
                status[o] = st
                stop_step[o] = step
                break
            done = step
            if record_every > 0 and step % record_every == 0 and rec < history.shape[1]:
                tangent_store(o, step * h, acc, history[:, rec])
                rec += 1
        if done > 0:
            tangent_store(o, done * h, acc, final)


@njit(cache=True, nogil=True)
def tangent_pp_kind(kern, z, prm, hp, hpd, constant_pp):
    """How the drift moves the deviation vectors: 0 through the full block d2H/dp2 (``hp``,
    evaluated at every drift), 1 through its diagonal ``hpd`` (a constant diagonal block),
    2 unchanged (a constant identity block, as for p^2/2: the product by its 1.0 entries is
    left out, the same numbers). A constant block is evaluated once at ``z``."""
    n = hp.shape[0]
    if not constant_pp:
        return 0
    hess_pp(kern, z, prm, hp)
    kind = 2
    for a in range(n):
        hpd[a] = hp[a, a]
        if hpd[a] != 1.0:
            kind = 1
        for b in range(n):
            if a != b and hp[a, b] != 0.0:
                return 0
    return kind


@njit(cache=True, nogil=True)
def tangent_sali(v0, v1):
    """SALI of two unit deviation vectors: min(|v0 + v1|, |v0 - v1|)."""
    plus = 0.0
    minus = 0.0
    for j in range(v0.shape[0]):
        plus += (v0[j] + v1[j]) ** 2
        minus += (v0[j] - v1[j]) ** 2
    return min(math.sqrt(plus), math.sqrt(minus))


@njit(cache=True, nogil=True)
def tangent_composition_indicators(kern, Z0, W0, prm, h, n_steps, record_every, weights, constant_pp,
                                   box_lo, box_hi, final, history, status, stop_step):
    """:func:`tangent_flow_indicators` for a composition of leapfrogs (a separable H), with
    the step and its tangent map written out in the orbit loop (the hot loop of chaos maps):
    the arithmetic of ``composition_tangent_step``, without its calls.

    Everything one orbit steps with (state, the one or two deviation vectors, the kernels'
    outputs) lives in ONE scratch array at fixed offsets, so the compiler knows that a
    kernel writing its output cannot change the state or the vectors and keeps them in
    registers between the sub-steps (separate arrays may overlap as far as it can tell, and
    every value then goes to memory and back on each sub-step: most of the time the loop
    took beyond a hand-written one). The second vector is stepped only when SALI is asked
    for (``W0.shape[2] == 2``). With ``constant_pp`` (d2H/dp2 the same everywhere) the block
    is evaluated once per orbit (:func:`tangent_pp_kind`). A matrix-vector product starts
    from its first term instead of 0.0 + (the same numbers, but for the sign of a zero
    entry). The running sums of :func:`tangent_update` are local variables written to
    ``acc`` only when stored; values agree with :func:`tangent_flow_indicators`."""
    n_orb = Z0.shape[0]
    s = weights.shape[0]
    cc = np.empty(s + 1)
    dd = np.empty(s)
    cc[0] = 0.5 * weights[0] * h
    for i in range(s):
        dd[i] = weights[i] * h
        cc[i + 1] = 0.5 * (weights[i] + weights[i + 1]) * h if i + 1 < s else 0.5 * weights[i] * h
    for o in range(n_orb):
        m = nstate(Z0[o])
        n = m // 2
        k = W0.shape[2]
        # z | v0 | v1 | dH/dp | dH/dq | diagonal of d2H/dp2 | d2H/dp2 | d2H/dq2
        buf = np.empty(3 * m + 3 * n + 2 * n * n)
        z = buf[0:m]
        v0 = buf[m:2 * m]
        v1 = buf[2 * m:3 * m]
        gp = buf[3 * m:3 * m + n]
        gq = buf[3 * m + n:3 * m + 2 * n]
        hpd = buf[3 * m + 2 * n:3 * m + 3 * n]
        hp = buf[3 * m + 3 * n:3 * m + 3 * n + n * n].reshape((n, n))
        hq = buf[3 * m + 3 * n + n * n:3 * m + 3 * n + 2 * n * n].reshape((n, n))
        acc = np.zeros(5)
        acc[4] = np.nan
        W = W0[o].copy()
        tangent_normalise(W)
        for j in range(m):
            z[j] = Z0[o, j]
            v0[j] = W[j, 0]
            v1[j] = W[j, k - 1]
        st = check_state(z, box_lo, box_hi)
        if st != OK:
            status[o] = st
            stop_step[o] = 0
            continue
        pp = tangent_pp_kind(kern, z, prm, hp, hpd, constant_pp)
        rec = 0
        done = 0
        log_sum = 0.0
        fli = 0.0
        y_int = 0.0
        y_mean = 0.0
        sali = np.nan
        for step in range(1, n_steps + 1):
            for i in range(s + 1):
                c = cc[i]
                if not constant_pp:
                    hess_pp(kern, z, prm, hp)
                grad_p(kern, z, prm, gp)
                for a in range(n):
                    z[a] += c * gp[a]
                if pp == 2:
                    for a in range(n):
                        v0[a] += c * v0[n + a]
                    if k > 1:
                        for a in range(n):
                            v1[a] += c * v1[n + a]
                elif pp == 1:
                    for a in range(n):
                        v0[a] += c * (hpd[a] * v0[n + a])
                    if k > 1:
                        for a in range(n):
                            v1[a] += c * (hpd[a] * v1[n + a])
                else:
                    for a in range(n):
                        t = hp[a, 0] * v0[n]
                        for b in range(1, n):
                            t += hp[a, b] * v0[n + b]
                        v0[a] += c * t
                    if k > 1:
                        for a in range(n):
                            t = hp[a, 0] * v1[n]
                            for b in range(1, n):
                                t += hp[a, b] * v1[n + b]
                            v1[a] += c * t
                if i == s:
                    break
                tangent_kick(kern, z, v0, v1, gq, hq, dd[i], k, prm)
            # tangent_update, with the running sums in local variables
            g = 0.0
            for j in range(m):
                g += v0[j] * v0[j]
            g = math.sqrt(g)
            g2 = 1.0
            if k > 1:
                g2 = 0.0
                for j in range(m):
                    g2 += v1[j] * v1[j]
                g2 = math.sqrt(g2)
            st = check_state(z, box_lo, box_hi)
            if st == OK and not (tangent_usable(g) and tangent_usable(g2)):
                st = SINGULAR
            if st != OK:
                status[o] = st
                stop_step[o] = step
                break
            growth = math.log(g)
            log_sum += growth
            if log_sum > fli:
                fli = log_sum
            now = step * h
            y_int += 2.0 * (now - 0.5 * h) * growth
            y_mean += (y_int / now - y_mean) * h / now
            for j in range(m):
                v0[j] /= g
            if k > 1:
                for j in range(m):
                    v1[j] /= g2
                sali = tangent_sali(v0, v1)
            done = step
            if record_every > 0 and step % record_every == 0 and rec < history.shape[1]:
                acc[0], acc[1], acc[2], acc[3], acc[4] = log_sum, fli, y_int, y_mean, sali
                tangent_store(o, now, acc, history[:, rec])
                rec += 1
        acc[0], acc[1], acc[2], acc[3], acc[4] = log_sum, fli, y_int, y_mean, sali
        if done > 0:
            tangent_store(o, done * h, acc, final)


@njit(cache=True, nogil=True)
def tangent_map_indicators(kern, Z0, W0, prm, n_iter, record_every, modulus, low, box_lo, box_hi,
                           final, history, status, stop_step):
    """The indicators of :func:`tangent_flow_indicators` for an area-preserving map, one
    iterate being one unit of time. ``modulus`` and ``low`` (shape ``(2n,)``) wrap a
    component into ``[low, low + m)`` where ``m > 0``."""
    n_orb = Z0.shape[0]
    m = Z0.shape[1]
    for o in range(n_orb):
        k = W0.shape[2]
        jac = np.zeros((m, m))
        znew = np.zeros(m)
        Wn = np.zeros((m, k))
        acc = np.zeros(5)
        acc[4] = np.nan
        z = Z0[o].copy()
        W = W0[o].copy()
        tangent_normalise(W)
        st = check_state(z, box_lo, box_hi)
        if st != OK:
            status[o] = st
            stop_step[o] = 0
            continue
        rec = 0
        done = 0
        for it in range(1, n_iter + 1):
            map_jacobian(kern, z, prm, jac)
            map_step(kern, z, prm, znew)
            for j in range(m):
                for col in range(k):
                    a = 0.0
                    for l in range(m):
                        a += jac[j, l] * W[l, col]
                    Wn[j, col] = a
            for j in range(m):
                v = znew[j]
                if modulus[j] > 0.0:
                    v = v - modulus[j] * math.floor((v - low[j]) / modulus[j])
                z[j] = v
                for col in range(k):
                    W[j, col] = Wn[j, col]
            st = check_state(z, box_lo, box_hi)
            if st == OK:
                st = tangent_update(W, float(it), 1.0, acc)
            if st != OK:
                status[o] = st
                stop_step[o] = it
                break
            done = it
            if record_every > 0 and it % record_every == 0 and rec < history.shape[1]:
                tangent_store(o, float(it), acc, history[:, rec])
                rec += 1
        if done > 0:
            tangent_store(o, float(done), acc, final)
