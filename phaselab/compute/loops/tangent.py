"""Tangent dynamics and chaos indicators, compiled together with a system's kernels.

Like ``steppers.py`` this file is text compiled into each system's generated module; the
kernel names (``jacobian``, ``vector_field``, ``grad_q``, ``grad_p``, ``map_step``,
``map_jacobian``) and ``NDOF``, ``NSTATE`` are globals there.

Deviation vectors are propagated by the exact derivative of the numerical step (for a
splitting method through the same drifts and kicks; for Gauss-Legendre by solving the
variational equations with the same collocation, which is the derivative of the step), so
the tangent map is symplectic whenever the step is.
"""


@njit(cache=True, nogil=True)
def _mat_vec_block(Jm, r0, c0, size, W, wr0, out, coeff):
    """out[i, :] += coeff * sum_j Jm[r0+i, c0+j] * W[wr0+j, :] for i < size."""
    k = W.shape[1]
    for i in range(size):
        for col in range(k):
            acc = 0.0
            for j in range(size):
                acc += Jm[r0 + i, c0 + j] * W[wr0 + j, col]
            out[i, col] += coeff * acc


@njit(cache=True, nogil=True)
def tangent_composition_step(z, W, h, prm, weights, gq, gp, Jm, tmp):
    """A composition step of ``z`` with its deviation vectors ``W`` (shape ``(2n, k)``).

    A drift ``q += c dH/dp(p)`` moves ``dq += c H_pp dp``; a kick ``p -= d dH/dq(q)`` moves
    ``dp -= d H_qq dq``, with the Hessian blocks read from the vector field's Jacobian
    (``H_pp = J[:n, n:]``, ``H_qq = -J[n:, :n]`` for a separable H).
    """
    n = NDOF
    k = W.shape[1]
    s = weights.shape[0]
    c = 0.5 * weights[0] * h
    for stage in range(s + 1):
        # drift by c
        jacobian(z, prm, Jm)
        grad_p(z, prm, gp)
        for i in range(n):
            z[i] += c * gp[i]
        for i in range(n):
            for col in range(k):
                tmp[i, col] = 0.0
        _mat_vec_block(Jm, 0, n, n, W, n, tmp, c)
        for i in range(n):
            for col in range(k):
                W[i, col] += tmp[i, col]
        if stage == s:
            break
        # kick by d
        d = weights[stage] * h
        jacobian(z, prm, Jm)
        grad_q(z, prm, gq)
        for i in range(n):
            z[n + i] -= d * gq[i]
        for i in range(n):
            for col in range(k):
                tmp[i, col] = 0.0
        # J[n:, :n] = -H_qq, so dp += d * J[n:, :n] dq
        _mat_vec_block(Jm, n, 0, n, W, 0, tmp, d)
        for i in range(n):
            for col in range(k):
                W[n + i, col] += tmp[i, col]
        if stage + 1 < s:
            c = 0.5 * (weights[stage] + weights[stage + 1]) * h
        else:
            c = 0.5 * weights[stage] * h
    return OK


@njit(cache=True, nogil=True)
def tangent_gauss_step(z, W, h, prm, A, b, tol, maxit, K, Kn, L, Ln, zs, Ws, Jm):
    """Gauss-Legendre step of the state and of the variational equations dW/dt = J(z) W,
    solved together by fixed-point iteration. Returns a status code."""
    m = NSTATE
    s = b.shape[0]
    k = W.shape[1]
    vector_field(z, prm, K[0])
    jacobian(z, prm, Jm)
    for i in range(s):
        for j in range(m):
            K[i, j] = K[0, j]
            for col in range(k):
                acc = 0.0
                for l in range(m):
                    acc += Jm[j, l] * W[l, col]
                L[i, j, col] = acc
    scale = 1.0
    for j in range(m):
        if abs(z[j]) > scale:
            scale = abs(z[j])
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
                for col in range(k):
                    acc = 0.0
                    for l in range(s):
                        acc += A[i, l] * L[l, j, col]
                    Ws[j, col] = W[j, col] + h * acc
            vector_field(zs, prm, Kn[i])
            jacobian(zs, prm, Jm)
            for j in range(m):
                for col in range(k):
                    acc = 0.0
                    for l in range(m):
                        acc += Jm[j, l] * Ws[l, col]
                    Ln[i, j, col] = acc
        diff = 0.0
        wdiff = 0.0
        wscale = 1.0
        for i in range(s):
            for j in range(m):
                d = abs(Kn[i, j] - K[i, j]) * abs(h)
                if d > diff:
                    diff = d
                K[i, j] = Kn[i, j]
                for col in range(k):
                    d = abs(Ln[i, j, col] - L[i, j, col]) * abs(h)
                    if d > wdiff:
                        wdiff = d
                    if abs(W[j, col]) > wscale:
                        wscale = abs(W[j, col])
                    L[i, j, col] = Ln[i, j, col]
        if not (diff == diff) or not (wdiff == wdiff):
            return NOT_FINITE
        wlimit = tol * wscale
        if diff <= limit and wdiff <= wlimit:
            done = True
            break
        if diff >= prev and diff <= 100.0 * limit and wdiff <= 100.0 * wlimit:
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
        for col in range(k):
            acc = 0.0
            for i in range(s):
                acc += b[i] * L[i, j, col]
            W[j, col] += h * acc
    return OK


@njit(cache=True, nogil=True)
def tangent_advance(z, W, h, prm, kind, weights, A, b, tol, maxit, work, work3, Jm, Ws):
    """One step of ``z`` and its deviation vectors ``W``; ``kind`` as in :func:`advance`
    (composition or Gauss-Legendre; Runge-Kutta is not offered for tangent dynamics)."""
    n = NDOF
    if kind == COMPOSITION:
        return tangent_composition_step(z, W, h, prm, weights, work[0, :n], work[1, :n], Jm,
                                        Ws[:n])
    s = b.shape[0]
    return tangent_gauss_step(z, W, h, prm, A, b, tol, maxit, work[:s], work[s:2 * s],
                              work3[:s], work3[s:2 * s], work[2 * s], Ws, Jm)


@njit(cache=True, nogil=True)
def _norm(W, col):
    acc = 0.0
    for j in range(W.shape[0]):
        acc += W[j, col] * W[j, col]
    return math.sqrt(acc)


@njit(cache=True, nogil=True)
def _indicator_update(W, t, h, log_sum, fli, y_int, y_mean, use_sali):
    """Renormalise the deviation vectors after a step ending at time ``t`` and update the
    running indicators. Returns (log_sum, fli, y_int, y_mean, sali)."""
    g = _norm(W, 0)
    growth = math.log(g)
    log_sum += growth
    if log_sum > fli:
        fli = log_sum
    # MEGNO: Y(t) = (2/t) int_0^t s d(ln|w|)/ds ds, averaged in time
    y_int += 2.0 * (t - 0.5 * h) * growth
    y_now = y_int / t
    y_mean = y_mean + (y_now - y_mean) * h / t
    for j in range(W.shape[0]):
        W[j, 0] /= g
    sali = np.nan
    if use_sali:
        g2 = _norm(W, 1)
        for j in range(W.shape[0]):
            W[j, 1] /= g2
        plus = 0.0
        minus = 0.0
        for j in range(W.shape[0]):
            plus += (W[j, 0] + W[j, 1]) ** 2
            minus += (W[j, 0] - W[j, 1]) ** 2
        sali = min(math.sqrt(plus), math.sqrt(minus))
    return log_sum, fli, y_int, y_mean, sali


@njit(cache=True, nogil=True, parallel=True)
def run_indicators(Z0, W0, prm, h, n_steps, record_every, kind, weights, A, b, tol, maxit,
                   box_lo, box_hi, out_lce, out_megno, out_fli, out_sali, status,
                   stop_step):
    """Benettin's largest Lyapunov exponent, MEGNO, FLI and SALI along every orbit.

    ``W0`` has shape ``(n_orbits, 2n, k)`` with ``k = 1`` or ``2`` (SALI needs two vectors).
    The deviation vectors are renormalised after every step. Running values are recorded
    every ``record_every`` steps into ``out_*`` (shape ``(n_orbits, n_records)``, pre-filled
    with NaN); record ``r`` is taken at time ``(r + 1) * record_every * h``.
    """
    n_orb = Z0.shape[0]
    k = W0.shape[2]
    use_sali = k > 1
    for o in prange(n_orb):
        s = max(b.shape[0], 1)
        work = make_work(s)
        work3 = np.zeros((2 * s, NSTATE, k))
        Jm = np.zeros((NSTATE, NSTATE))
        Ws = np.zeros((NSTATE, k))
        z = Z0[o].copy()
        W = W0[o].copy()
        for col in range(k):
            g = _norm(W, col)
            for j in range(NSTATE):
                W[j, col] /= g
        st = check_state(z, box_lo, box_hi)
        if st != OK:
            status[o] = st
            stop_step[o] = 0
            continue
        log_sum = 0.0
        fli = 0.0
        y_int = 0.0
        y_mean = 0.0
        rec = 0
        for step in range(1, n_steps + 1):
            st = tangent_advance(z, W, h, prm, kind, weights, A, b, tol, maxit, work, work3, Jm, Ws)
            if st == OK:
                st = check_state(z, box_lo, box_hi)
            if st != OK:
                status[o] = st
                stop_step[o] = step
                break
            t = step * h
            log_sum, fli, y_int, y_mean, sali = _indicator_update(
                W, t, h, log_sum, fli, y_int, y_mean, use_sali)
            if step % record_every == 0:
                out_lce[o, rec] = log_sum / t
                out_megno[o, rec] = y_mean
                out_fli[o, rec] = fli
                out_sali[o, rec] = sali
                rec += 1


@njit(cache=True, nogil=True, parallel=True)
def run_map_indicators(Z0, W0, prm, n_iter, record_every, modulus, low, box_lo, box_hi,
                       out_lce, out_megno, out_fli, out_sali, status, stop_step):
    """The indicators of :func:`run_indicators` for an area-preserving map, one iterate being
    one unit of time. ``modulus`` and ``low`` (shape ``(2n,)``) wrap a component into
    ``[low, low + m)`` where ``m > 0``."""
    n_orb = Z0.shape[0]
    k = W0.shape[2]
    use_sali = k > 1
    for o in prange(n_orb):
        Jm = np.zeros((NSTATE, NSTATE))
        znew = np.zeros(NSTATE)
        Wn = np.zeros((NSTATE, k))
        z = Z0[o].copy()
        W = W0[o].copy()
        for col in range(k):
            g = _norm(W, col)
            for j in range(NSTATE):
                W[j, col] /= g
        st = check_state(z, box_lo, box_hi)
        if st != OK:
            status[o] = st
            stop_step[o] = 0
            continue
        log_sum = 0.0
        fli = 0.0
        y_int = 0.0
        y_mean = 0.0
        rec = 0
        for it in range(1, n_iter + 1):
            map_jacobian(z, prm, Jm)
            map_step(z, prm, znew)
            for j in range(NSTATE):
                for col in range(k):
                    acc = 0.0
                    for l in range(NSTATE):
                        acc += Jm[j, l] * W[l, col]
                    Wn[j, col] = acc
            for j in range(NSTATE):
                v = znew[j]
                if modulus[j] > 0.0:
                    v = v - modulus[j] * math.floor((v - low[j]) / modulus[j])
                z[j] = v
                for col in range(k):
                    W[j, col] = Wn[j, col]
            st = check_state(z, box_lo, box_hi)
            if st != OK:
                status[o] = st
                stop_step[o] = it
                break
            log_sum, fli, y_int, y_mean, sali = _indicator_update(
                W, float(it), 1.0, log_sum, fli, y_int, y_mean, use_sali)
            if it % record_every == 0:
                out_lce[o, rec] = log_sum / it
                out_megno[o, rec] = y_mean
                out_fli[o, rec] = fli
                out_sali[o, rec] = sali
                rec += 1
