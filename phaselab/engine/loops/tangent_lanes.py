"""Chaos indicators of a composition of leapfrogs for H = p^2/2 + V(q) (d2H/dp2 the identity
everywhere), two orbits side by side: the hot loop of chaos maps.

Loop text (see ``steppers.py`` for what the assembled module provides); ``check_state`` comes
from ``steppers.py``, ``tangent_normalise``, ``tangent_usable``, ``tangent_sali`` and
``tangent_store`` from ``tangent.py``. Names defined here start with ``lanes_``.

One orbit's step and its tangent map is a long chain of dependent operations (each drift
and kick waits for the previous one), so one orbit alone leaves most of the processor idle.
Two orbits are stepped side by side, sub-step by sub-step (lanes A and B; a lane whose orbit
is done takes the next one), and the processor works on one while the other waits. Each
lane's numbers live in one scratch array (:func:`lanes_views`), the step is written out with
helpers inlined into the loop (``inline="always"``), and the loop holds no branch on the
kind of d2H/dp2: an orbit whose block at its start is not the identity is left for
``tangent_composition_indicators`` (``skipped``). Each orbit's arithmetic is that of
``tangent_composition_indicators``, in the same order, whatever its lane and neighbour.
"""

REQUIRES = ("steppers", "tangent")
PROVIDES = ("lanes_composition_indicators",)
ORBITS = {
    "lanes_composition_indicators": ("Z0", "W0", "final", "history", "status", "stop_step", "skipped"),
}


@njit(cache=True, nogil=True)
def lanes_scratch_size(m):
    """Entries of one lane's scratch array (see :func:`lanes_views`) for a state of size ``m``."""
    n = m // 2
    return 3 * m + 2 * n + 2 * n * n + 5


@njit(cache=True, nogil=True, inline="always")
def lanes_views(buf, m):
    """The parts of one lane's scratch array ``buf`` for a state of size ``m = 2n``: z, v0,
    v1 (m,); dH/dp, dH/dq (n,); d2H/dp2, d2H/dq2 (n, n); the running sums [log_sum, fli,
    y_int, y_mean, sali] (5,). One array at fixed offsets: the compiler then knows that a
    kernel writing its output leaves the state and the vectors alone, and keeps them in
    registers between sub-steps."""
    n = m // 2
    e = 3 * m + 2 * n
    return (buf[0:m], buf[m:2 * m], buf[2 * m:3 * m], buf[3 * m:3 * m + n], buf[3 * m + n:e],
            buf[e:e + n * n].reshape((n, n)), buf[e + n * n:e + 2 * n * n].reshape((n, n)),
            buf[e + 2 * n * n:e + 2 * n * n + 5])


@njit(cache=True, nogil=True)
def lanes_unit_block(kern, z, prm, hp):
    """Whether d2H/dp2 at ``z`` is the identity (``hp`` is n x n scratch)."""
    hess_pp(kern, z, prm, hp)
    n = hp.shape[0]
    for a in range(n):
        for b in range(n):
            if hp[a, b] != (1.0 if a == b else 0.0):
                return False
    return True


@njit(cache=True, nogil=True)
def lanes_next(kern, nxt, Z0, W0, z, v0, v1, hp, sums, prm, box_lo, box_hi, status, stop_step, skipped):
    """Load the next orbit from ``nxt`` on that can start into a lane: its state, its
    deviation vectors normalised, the sums zeroed (SALI NaN). Orbits that cannot start get
    their status and stop step 0; those whose d2H/dp2 is not the identity are marked in
    ``skipped``. Returns ``(orbit or -1, next nxt)``."""
    m = z.shape[0]
    k = W0.shape[2]
    while nxt < Z0.shape[0]:
        o = nxt
        nxt += 1
        st = check_state(Z0[o], box_lo, box_hi)
        if st != OK:
            status[o] = st
            stop_step[o] = 0
            continue
        W = W0[o].copy()
        tangent_normalise(W)
        for j in range(m):
            z[j] = Z0[o, j]
            v0[j] = W[j, 0]
            v1[j] = W[j, k - 1]
        if not lanes_unit_block(kern, z, prm, hp):
            skipped[o] = True
            continue
        for j in range(4):
            sums[j] = 0.0
        sums[4] = np.nan
        return o, nxt
    return -1, nxt


@njit(cache=True, nogil=True, inline="always")
def lanes_drift(kern, z, v0, v1, gp, c, k, prm):
    """Drift q += c p and its tangent v_q += c v_p for the one or two vectors."""
    n = gp.shape[0]
    grad_p(kern, z, prm, gp)
    for a in range(n):
        z[a] += c * gp[a]
    for a in range(n):
        v0[a] += c * v0[n + a]
    if k > 1:
        for a in range(n):
            v1[a] += c * v1[n + a]


@njit(cache=True, nogil=True, inline="always")
def lanes_close(z, v0, v1, k, now, h, sums, box_lo, box_hi):
    """End a step at time ``now``: the arithmetic of ``tangent_update`` on the running
    ``sums`` (renormalise; exponent, FLI, MEGNO; SALI with two vectors). Returns ``OK``, or
    the state's status or ``SINGULAR`` (then nothing has changed)."""
    m = z.shape[0]
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
        return st
    growth = math.log(g)
    sums[0] += growth
    if sums[0] > sums[1]:
        sums[1] = sums[0]
    # MEGNO: Y(t) = (2/t) int_0^t s d(ln|w|)/ds ds, averaged in time
    sums[2] += 2.0 * (now - 0.5 * h) * growth
    sums[3] += (sums[2] / now - sums[3]) * h / now
    for j in range(m):
        v0[j] /= g
    if k > 1:
        for j in range(m):
            v1[j] /= g2
        sums[4] = tangent_sali(v0, v1)
    return OK


@njit(cache=True, nogil=True)
def lanes_end(o, step, st, h, sums, final, status, stop_step):
    """Close orbit ``o`` after step ``step`` (status ``st``): its indicators at the last
    completed step into ``final`` (a call, not inlined: the loop runs faster without this
    rarely taken code written into it)."""
    done = step
    if st != OK:
        status[o] = st
        stop_step[o] = step
        done = step - 1
    if done > 0:
        tangent_store(o, done * h, sums, final)


@njit(cache=True, nogil=True)
def lanes_composition_indicators(kern, Z0, W0, prm, h, n_steps, record_every, weights, box_lo, box_hi,
                                 final, history, status, stop_step, skipped):
    """``tangent_composition_indicators`` (same arguments but ``constant_pp``, here the
    identity) with two orbits side by side. ``skipped`` (bool, (n_orbits,), False-filled)
    marks the orbits whose d2H/dp2 at the start is not the identity: they are not run."""
    s = weights.shape[0]
    k = W0.shape[2]
    cc = np.empty(s + 1)
    dd = np.empty(s)
    cc[0] = 0.5 * weights[0] * h
    for i in range(s):
        dd[i] = weights[i] * h
        cc[i + 1] = 0.5 * (weights[i] + weights[i + 1]) * h if i + 1 < s else 0.5 * weights[i] * h
    if Z0.shape[0] == 0:
        return
    m = nstate(Z0[0])
    buf_a = np.empty(lanes_scratch_size(m))
    buf_b = np.empty(lanes_scratch_size(m))
    za, v0a, v1a, gpa, gqa, hpa, hqa, suma = lanes_views(buf_a, m)
    zb, v0b, v1b, gpb, gqb, hpb, hqb, sumb = lanes_views(buf_b, m)
    oa, nxt = lanes_next(kern, np.int64(0), Z0, W0, za, v0a, v1a, hpa, suma, prm, box_lo, box_hi, status,
                         stop_step, skipped)
    ob, nxt = lanes_next(kern, nxt, Z0, W0, zb, v0b, v1b, hpb, sumb, prm, box_lo, box_hi, status, stop_step,
                         skipped)
    step_a, step_b, rec_a, rec_b = 0, 0, 0, 0
    while oa >= 0 or ob >= 0:
        on_a = oa >= 0
        on_b = ob >= 0
        for i in range(s + 1):
            c = cc[i]
            if on_a:
                lanes_drift(kern, za, v0a, v1a, gpa, c, k, prm)
            if on_b:
                lanes_drift(kern, zb, v0b, v1b, gpb, c, k, prm)
            if i == s:
                break
            d = dd[i]
            if on_a:
                tangent_kick(kern, za, v0a, v1a, gqa, hqa, d, k, prm)
            if on_b:
                tangent_kick(kern, zb, v0b, v1b, gqb, hqb, d, k, prm)
        if on_a:
            step_a += 1
            st = lanes_close(za, v0a, v1a, k, step_a * h, h, suma, box_lo, box_hi)
            if st == OK and record_every > 0 and step_a % record_every == 0 and rec_a < history.shape[1]:
                tangent_store(oa, step_a * h, suma, history[:, rec_a])
                rec_a += 1
            if st != OK or step_a == n_steps:
                lanes_end(oa, step_a, st, h, suma, final, status, stop_step)
                oa, nxt = lanes_next(kern, nxt, Z0, W0, za, v0a, v1a, hpa, suma, prm, box_lo, box_hi, status,
                                     stop_step, skipped)
                step_a, rec_a = 0, 0
        if on_b:
            step_b += 1
            st = lanes_close(zb, v0b, v1b, k, step_b * h, h, sumb, box_lo, box_hi)
            if st == OK and record_every > 0 and step_b % record_every == 0 and rec_b < history.shape[1]:
                tangent_store(ob, step_b * h, sumb, history[:, rec_b])
                rec_b += 1
            if st != OK or step_b == n_steps:
                lanes_end(ob, step_b, st, h, sumb, final, status, stop_step)
                ob, nxt = lanes_next(kern, nxt, Z0, W0, zb, v0b, v1b, hpb, sumb, prm, box_lo, box_hi, status,
                                     stop_step, skipped)
                step_b, rec_b = 0, 0
