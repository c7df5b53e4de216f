"""Chaos indicators along orbits, compiled together with a system's kernels.

Like ``steppers.py`` this file is text compiled into each system's generated module; the
kernel names (``jacobian``, ``map_step``, ``map_jacobian``), ``NDOF``, ``NSTATE`` and the
steppers' ``advance_tangent`` are globals there.

Deviation vectors are propagated by ``advance_tangent``, the exact derivative of the
numerical step, so the tangent map is symplectic whenever the step is.
"""


@njit(cache=True, nogil=True)
def _norm(W, col):
    acc = 0.0
    for j in range(W.shape[0]):
        acc += W[j, col] * W[j, col]
    return math.sqrt(acc)


@njit(cache=True, nogil=True)
def _normalise_columns(W):
    for col in range(W.shape[1]):
        g = _norm(W, col)
        for j in range(W.shape[0]):
            W[j, col] /= g


@njit(cache=True, nogil=True)
def _record(o, rec, lce, megno, fli, sali, out_lce, out_megno, out_fli, out_sali):
    out_lce[o, rec] = lce
    out_megno[o, rec] = megno
    out_fli[o, rec] = fli
    out_sali[o, rec] = sali


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
        work = make_work(max(b.shape[0], 1))
        Jm = np.zeros((NSTATE, NSTATE))
        z = Z0[o].copy()
        W = W0[o].copy()
        _normalise_columns(W)
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
            st = advance_tangent(z, W, h, prm, kind, weights, A, b, tol, maxit, work, Jm)
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
                _record(o, rec, log_sum / t, y_mean, fli, sali, out_lce, out_megno, out_fli, out_sali)
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
        _normalise_columns(W)
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
                _record(o, rec, log_sum / it, y_mean, fli, sali, out_lce, out_megno, out_fli, out_sali)
                rec += 1
