"""Compiled surfaces of section: plane crossings refined by Henon's step, stroboscopic
sampling of driven systems, and iteration of area-preserving maps.

Loop text (see ``steppers.py`` for what the assembled module provides); ``advance``,
``make_work`` and ``check_state`` come from ``steppers.py``. Names defined here start with
``section_`` so they cannot clash with other loop files.

Henon's step (M. Henon, Physica D 5, 412 (1982)): after a step over which
``g = z[k] - value`` changed sign, take ``s = z[k]`` as the independent variable,
``dz/ds = f(z) / f_k(z)`` and ``dt/ds = 1 / f_k(z)``, and integrate from the nearer of the
two step ends to ``s = value``. Here that integration is classical RK4 with m = 1, 2, 4, ...
equal sub-steps until two successive results agree to ``SECTION_REFINE_TOL``, then one
Richardson extrapolation (RK4 error ~ m^-4). ``z[k]`` of the result is ``value`` exactly,
as it is the independent variable.
"""

REQUIRES = ("steppers",)
PROVIDES = ("section_plane_orbits", "section_strobe_orbits", "section_map_orbits")
ORBITS = {
    "section_plane_orbits": ("Z0", "out_points", "out_times", "counts", "energy_error", "status", "stop_time"),
    "section_strobe_orbits": ("Z0", "out_points", "counts", "energy_error", "status"),
    "section_map_orbits": ("Z0", "out_points", "counts", "status"),
}


@njit(cache=True, nogil=True)
def section_henon_rhs(kern, z, k, prm, f, out):
    """``out = f(z) / f_k(z)``; returns ``dt/ds = 1 / f_k(z)``."""
    vector_field(kern, z, prm, f)
    inv = 1.0 / f[k]
    for j in range(nstate(z)):
        out[j] = f[j] * inv
    return inv


@njit(cache=True, nogil=True)
def section_henon_rk4(kern, z, t, ds, k, prm, rw):
    """One RK4 step of length ``ds`` in ``s = z[k]`` (in place); returns the new time.
    ``rw`` rows: 0 f, 1..4 slopes, 5 stage state."""
    m = nstate(z)
    f = rw[0]
    k1 = rw[1]
    k2 = rw[2]
    k3 = rw[3]
    k4 = rw[4]
    zs = rw[5]
    a1 = section_henon_rhs(kern, z, k, prm, f, k1)
    for j in range(m):
        zs[j] = z[j] + 0.5 * ds * k1[j]
    a2 = section_henon_rhs(kern, zs, k, prm, f, k2)
    for j in range(m):
        zs[j] = z[j] + 0.5 * ds * k2[j]
    a3 = section_henon_rhs(kern, zs, k, prm, f, k3)
    for j in range(m):
        zs[j] = z[j] + ds * k3[j]
    a4 = section_henon_rhs(kern, zs, k, prm, f, k4)
    for j in range(m):
        z[j] += ds * (k1[j] + 2.0 * k2[j] + 2.0 * k3[j] + k4[j]) / 6.0
    return t + ds * (a1 + 2.0 * a2 + 2.0 * a3 + a4) / 6.0


@njit(cache=True, nogil=True)
def section_refine(kern, z0, t0, k, value, prm, out, rw):
    """The state where the orbit through ``z0`` (at time ``t0``) reaches ``z[k] = value``.

    Writes the state into ``out`` (shape (2n,)); returns ``(t, status)``. ``rw`` is scratch
    of shape (8, 2n).
    """
    m = nstate(z0)
    prev = rw[6]
    ds = value - z0[k]
    scale = 1.0
    for j in range(m):
        a = abs(z0[j])
        if a > scale:
            scale = a
    for j in range(m):
        out[j] = z0[j]
    t = section_henon_rk4(kern, out, t0, ds, k, prm, rw)
    n_sub = 1
    while True:
        for j in range(m):
            prev[j] = out[j]
        tprev = t
        n_sub *= 2
        for j in range(m):
            out[j] = z0[j]
        t = t0
        d = ds / n_sub
        for i in range(n_sub):
            t = section_henon_rk4(kern, out, t, d, k, prm, rw)
        diff = abs(t - tprev)
        for j in range(m):
            e = abs(out[j] - prev[j])
            if e > diff:
                diff = e
        if not (diff == diff):
            return t, NOT_FINITE
        if diff <= SECTION_REFINE_TOL * scale or n_sub >= SECTION_REFINE_MAX:
            break
    for j in range(m):
        out[j] += (out[j] - prev[j]) / 15.0
    t += (t - tprev) / 15.0
    out[k] = value
    for j in range(m):
        v = out[j]
        if not (v == v) or v == np.inf or v == -np.inf:
            return t, NOT_FINITE
    return t, OK


@njit(cache=True, nogil=True, inline="always")
def section_composition_coefficients(weights, h):
    """Drift and kick lengths of a composition of leapfrogs with adjacent half drifts merged:
    ``c[0], d[0], c[1], d[1], ..., d[s-1], c[s]`` as arrays ``c`` (s+1,) and ``d`` (s,)."""
    s = weights.shape[0]
    c = np.empty(s + 1)
    d = np.empty(s)
    c[0] = 0.5 * weights[0] * h
    for i in range(s):
        d[i] = weights[i] * h
        if i + 1 < s:
            c[i + 1] = 0.5 * (weights[i] + weights[i + 1]) * h
        else:
            c[i + 1] = 0.5 * weights[i] * h
    return c, d



@njit(cache=True, nogil=True)
def section_fill_lane(kern, l, nxt, last, Z0, Z, lane_orbit, lane_step, lane_e0, lane_g, prm, k, value,
                      direction, box_lo, box_hi, counts, energy_error, status, stop_time):
    """Load the next startable orbit (index ``nxt`` .. ``last - 1``) into lane ``l``; seeds
    that are non-finite, outside the box or where H is not finite are flagged and skipped.
    Returns the new ``nxt``; ``lane_orbit[l]`` is -1 when no orbit was left."""
    lane_orbit[l] = -1
    while nxt < last:
        o = nxt
        nxt += 1
        st = check_state(Z0[o], box_lo, box_hi)
        if st == OK:
            st = check_value(hamiltonian(kern, Z0[o], prm))
        counts[o] = 0
        stop_time[o] = 0.0
        if st != OK:
            status[o] = st
            energy_error[o] = np.nan
            continue
        for j in range(Z0.shape[1]):
            Z[l, j] = Z0[o, j]
        lane_e0[l] = hamiltonian(kern, Z[l], prm)
        lane_g[l] = direction * (Z[l, k] - value)
        lane_step[l] = 0
        energy_error[o] = 0.0
        status[o] = OK
        lane_orbit[l] = o
        break
    return nxt


@njit(cache=True, nogil=True)
def section_plane_orbits(kern, Z0, prm, h, max_steps, k, value, direction, max_cross, kind, weights,
                         A, b, tol, maxit, box_lo, box_hi, out_points, out_times, counts,
                         energy_error, status, stop_time):
    """Section every orbit of ``Z0`` (the orbits are independent: slices of them run on
    separate threads, see ``ORBITS``).

    Up to ``SECTION_LANES`` orbits are stepped side by side (sub-step by sub-step for
    compositions, so the processor overlaps their dependency chains); a lane whose orbit is
    done takes the next one. Each orbit stops after ``max_cross`` crossings of
    ``z[k] = value`` in the direction ``direction`` or after ``max_steps`` steps. The box and
    finiteness are checked every ``SECTION_CHECK_EVERY`` steps and before each refinement.
    ``status[o]`` is ``OK`` (all crossings found), ``TIME_LIMIT`` or the code that
    stopped the orbit; ``energy_error[o]`` the worst ``|H - H0| / max(|H0|, 1)`` at its
    crossings; ``stop_time[o]`` the time reached.

    ``out_points`` (n_orbits, max_cross, 2n) and ``out_times`` (n_orbits, max_cross) must be
    NaN-filled; ``counts``, ``energy_error``, ``status``, ``stop_time`` have shape (n_orbits,).
    (One function, not a wrapper around a worker: every level of compiled calls costs its
    own optimisation and machine code on a first call.)
    """
    first = np.int64(0)       # typed int64, not the literal 0: one signature of section_fill_lane
    last = Z0.shape[0]
    m = nstate(Z0[0])
    n = m // 2
    L = min(SECTION_LANES, last - first)
    if L <= 0:
        return
    Z = np.empty((L, m))
    ZP = np.empty((L, m))
    zc = np.empty(m)
    rw = np.empty((8, m))
    if FAMILY_KIND == COMPOSITION:       # stepped here, lane by lane (see below)
        GQ = np.empty((L, n))
        GP = np.empty((L, n))
        c, d = section_composition_coefficients(weights, h)
        s = d.shape[0]
    else:                                # stepped by the family's advance
        w0 = make_work(max(b.shape[0], 1), m)
        works = np.zeros((L, w0.shape[0], w0.shape[1]))
    lane_orbit = np.empty(L, dtype=np.int64)      # every lane is set by section_fill_lane
    lane_step = np.zeros(L, dtype=np.int64)
    lane_e0 = np.zeros(L)
    lane_g = np.zeros(L)
    nxt = first
    active = 0
    for l in range(L):
        nxt = section_fill_lane(kern, l, nxt, last, Z0, Z, lane_orbit, lane_step, lane_e0, lane_g, prm, k,
                                value, direction, box_lo, box_hi, counts, energy_error, status,
                                stop_time)
        if lane_orbit[l] >= 0:
            active += 1
    while active > 0:
        for l in range(L):
            for j in range(m):
                ZP[l, j] = Z[l, j]
        if FAMILY_KIND == COMPOSITION:      # the module's family: kind is COMPOSITION exactly here
            for i in range(s):
                ci = c[i]
                di = d[i]
                for l in range(L):
                    z = Z[l]
                    gp = GP[l]
                    gq = GQ[l]
                    grad_p(kern, z, prm, gp)
                    for j in range(n):
                        z[j] += ci * gp[j]
                    grad_q(kern, z, prm, gq)
                    for j in range(n):
                        z[n + j] -= di * gq[j]
            cs = c[s]
            for l in range(L):
                z = Z[l]
                gp = GP[l]
                grad_p(kern, z, prm, gp)
                for j in range(n):
                    z[j] += cs * gp[j]
        for l in range(L):
            o = lane_orbit[l]
            if o < 0:
                continue
            st = OK
            if FAMILY_KIND != COMPOSITION:
                st = advance(kern, Z[l], h, prm, kind, weights, A, b, tol, maxit, works[l])
            lane_step[l] += 1
            stp = lane_step[l]
            g_prev = lane_g[l]
            g = direction * (Z[l, k] - value)
            lane_g[l] = g
            crossed = g_prev < 0.0 and g >= 0.0
            if st == OK and (crossed or stp % SECTION_CHECK_EVERY == 0):
                st = check_state(Z[l], box_lo, box_hi)
            done = st != OK
            if crossed and not done:
                if -g_prev < g:
                    tc, st = section_refine(kern, ZP[l], (stp - 1) * h, k, value, prm, zc, rw)
                else:
                    tc, st = section_refine(kern, Z[l], stp * h, k, value, prm, zc, rw)
                hc = hamiltonian(kern, zc, prm)
                if st == OK:
                    st = check_value(hc)
                if st != OK:
                    done = True
                else:
                    cnt = counts[o]
                    for j in range(m):
                        out_points[o, cnt, j] = zc[j]
                    out_times[o, cnt] = tc
                    e = abs(hc - lane_e0[l]) / max(abs(lane_e0[l]), 1.0)
                    if e > energy_error[o]:
                        energy_error[o] = e
                    counts[o] = cnt + 1
                    if cnt + 1 >= max_cross:
                        done = True
            if not done and stp >= max_steps:
                st = TIME_LIMIT
                done = True
            if done:
                status[o] = st
                stop_time[o] = stp * h
                active -= 1
                nxt = section_fill_lane(kern, l, nxt, last, Z0, Z, lane_orbit, lane_step, lane_e0, lane_g,
                                        prm, k, value, direction, box_lo, box_hi, counts,
                                        energy_error, status, stop_time)
                if lane_orbit[l] >= 0:
                    active += 1


@njit(cache=True, nogil=True)
def section_strobe_orbits(kern, Z0, prm, h, steps_per_period, n_periods, kind, weights, A, b, tol, maxit,
                          box_lo, box_hi, out_points, counts, energy_error, status):
    """Sample every orbit of an extended (autonomous) system once per period.

    ``h * steps_per_period`` is the period; sample ``i`` is the state after ``(i + 1)``
    periods. The energy error is that of the extended Hamiltonian K (conserved exactly); an
    orbit where K is not finite stops with ``SINGULAR``.
    """
    n_orb = Z0.shape[0]
    m = Z0.shape[1]
    for o in range(n_orb):
        work = make_work(max(b.shape[0], 1), m)
        z = Z0[o].copy()
        k0 = hamiltonian(kern, z, prm)
        st = check_state(z, box_lo, box_hi)
        if st == OK:
            st = check_value(k0)
        if st != OK:
            status[o] = st
            energy_error[o] = np.nan
            continue
        escale = max(abs(k0), 1.0)
        worst = 0.0
        c = 0
        for i in range(n_periods):
            for s in range(steps_per_period):
                st = advance(kern, z, h, prm, kind, weights, A, b, tol, maxit, work)
                if st == OK:
                    st = check_state(z, box_lo, box_hi)
                if st != OK:
                    break
            if st != OK:
                break
            kz = hamiltonian(kern, z, prm)
            st = check_value(kz)
            if st != OK:
                break
            for j in range(m):
                out_points[o, i, j] = z[j]
            e = abs(kz - k0) / escale
            if e > worst:
                worst = e
            c += 1
        counts[o] = c
        status[o] = st
        energy_error[o] = worst


@njit(cache=True, nogil=True)
def section_map_orbits(kern, Z0, prm, n_iter, period, low, box_lo, box_hi, out_points, counts, status):
    """Iterate ``map_step`` on every row of ``Z0`` ``n_iter`` times, wrapping component j
    into ``[low[j], low[j] + period[j])`` where ``period[j] > 0``. Iterate i+1 goes to
    ``out_points[o, i]``. Non-finite or out-of-box iterates stop the orbit."""
    n_orb = Z0.shape[0]
    m = Z0.shape[1]
    for o in range(n_orb):
        z = Z0[o].copy()
        zn = np.empty(m)
        st = check_state(z, box_lo, box_hi)
        c = 0
        if st == OK:
            for i in range(n_iter):
                map_step(kern, z, prm, zn)
                for j in range(m):
                    v = zn[j]
                    if period[j] > 0.0:
                        v = low[j] + (v - low[j]) % period[j]
                    z[j] = v
                st = check_state(z, box_lo, box_hi)
                if st != OK:
                    break
                for j in range(m):
                    out_points[o, i, j] = z[j]
                c += 1
        counts[o] = c
        status[o] = st
