"""Published model systems with default parameters and slider ranges.

Every function returns a fresh system (a :class:`~phaselab.model.hamiltonian.Hamiltonian` or
an :class:`~phaselab.model.maps.AreaPreservingMap`) with a plain ``name``. Parameters carry
defaults and ``(low, high)`` slider ranges; override them per call with ``params={...}``.
The docstrings name the publication each model and its form come from. These are model
results: a stability or orbit question of a real machine or spacecraft is to be confirmed
with validated tools and the responsible engineers.

Available: :func:`pendulum`, :func:`henon_heiles`, :func:`kepler`,
:func:`double_pendulum`, :func:`restricted_three_body`,
:func:`spatial_restricted_three_body`, :func:`toda_lattice`,
:func:`fput_chain`, :func:`driven_pendulum`, :func:`standard_map`.
"""

from __future__ import annotations

import sympy as sp

from phaselab.errors import ModelError
from phaselab.model.hamiltonian import Hamiltonian
from phaselab.model.maps import AreaPreservingMap


def _real(names: str):
    return sp.symbols(names, real=True)


def pendulum() -> Hamiltonian:
    """The plane pendulum, H = p^2 / (2 m l^2) - m g l cos(q).

    State ``(q, p)``: ``q`` the angle from the downward vertical (rad), ``p`` the angular
    momentum (kg m^2 / s). Parameters ``m`` (kg), ``l`` (m), ``g`` (m/s^2). ``q`` is declared
    an angle of period 2 pi, and these units are declared with the model.

    Source: L. D. Landau and E. M. Lifshitz, *Mechanics*, 3rd ed. (Pergamon, 1976),
    §5 and §11 (the simple pendulum and its period at finite amplitude).
    """
    q, p, m, l, g = _real("q p m l g")
    H = p**2 / (2 * m * l**2) - m * g * l * sp.cos(q)
    return Hamiltonian(H, [q], [p], params={m: (1.0, (0.1, 10.0)), l: (1.0, (0.1, 10.0)),
                                            g: (9.81, (0.1, 30.0))}, name="pendulum",
                       angles={q: 2 * sp.pi},
                       units={q: "rad", p: "kg m^2/s", m: "kg", l: "m", g: "m/s^2", "t": "s"})


def henon_heiles() -> Hamiltonian:
    """The Henon-Heiles system,
    H = (px^2 + py^2)/2 + (x^2 + y^2)/2 + x^2 y - y^3/3.

    State ``(x, y, px, py)`` in the dimensionless units of the paper. Orbits are bounded
    for energies below the saddle energy 1/6.

    Source: M. Henon and C. Heiles, "The applicability of the third integral of motion:
    some numerical experiments", Astron. J. 69, 73 (1964).
    """
    x, y, px, py = _real("x y px py")
    H = (px**2 + py**2) / 2 + (x**2 + y**2) / 2 + x**2 * y - y**3 / 3
    return Hamiltonian(H, [x, y], [px, py], name="henon_heiles")


def kepler() -> Hamiltonian:
    """The Kepler problem in plane polar coordinates,
    H = p_r^2 / (2 m) + p_theta^2 / (2 m r^2) - k / r.

    State ``(r, theta, p_r, p_theta)``. ``theta`` is cyclic, so the angular momentum
    ``p_theta`` is conserved. Parameters ``m`` (mass) and ``k`` (strength of the attractive
    1/r potential).

    Source: H. Goldstein, C. Poole and J. Safko, *Classical Mechanics*, 3rd ed.
    (Addison-Wesley, 2002), ch. 3 (the central force problem).
    """
    r, th, pr, pth, m, k = _real("r theta p_r p_theta m k")
    H = pr**2 / (2 * m) + pth**2 / (2 * m * r**2) - k / r
    return Hamiltonian(H, [r, th], [pr, pth], params={m: (1.0, (0.1, 10.0)), k: (1.0, (0.1, 10.0))},
                       name="kepler")


def double_pendulum() -> Hamiltonian:
    """The plane double pendulum, built from its Lagrangian by the Legendre transform.

    L = (m1 + m2)/2 l1^2 w1^2 + m2/2 l2^2 w2^2 + m2 l1 l2 w1 w2 cos(theta1 - theta2)
        + (m1 + m2) g l1 cos(theta1) + m2 g l2 cos(theta2),

    with ``w_i`` the angular velocities and the angles measured from the downward vertical.
    State ``(theta1, theta2, p_theta1, p_theta2)``. Parameters ``m1, m2`` (kg),
    ``l1, l2`` (m), ``g`` (m/s^2), declared with the model; both angles have period 2 pi.
    The Lagrangian is kept as ``.lagrangian``.

    Source: L. D. Landau and E. M. Lifshitz, *Mechanics*, 3rd ed. (Pergamon, 1976),
    §5, problem 1 (the coplanar double pendulum).
    """
    t1, t2, w1, w2, m1, m2, l1, l2, g = _real("theta1 theta2 w1 w2 m1 m2 l1 l2 g")
    L = ((m1 + m2) / 2 * l1**2 * w1**2 + m2 / 2 * l2**2 * w2**2
         + m2 * l1 * l2 * w1 * w2 * sp.cos(t1 - t2)
         + (m1 + m2) * g * l1 * sp.cos(t1) + m2 * g * l2 * sp.cos(t2))
    params = {m1: (1.0, (0.1, 10.0)), m2: (1.0, (0.1, 10.0)), l1: (1.0, (0.1, 5.0)),
              l2: (1.0, (0.1, 5.0)), g: (9.81, (0.1, 30.0))}
    units = {t1: "rad", t2: "rad", "p_theta1": "kg m^2/s", "p_theta2": "kg m^2/s", m1: "kg", m2: "kg",
             l1: "m", l2: "m", g: "m/s^2", "t": "s"}
    return Hamiltonian.from_lagrangian(L, [t1, t2], [w1, w2], params=params, name="double_pendulum",
                                       angles={t1: 2 * sp.pi, t2: 2 * sp.pi}, units=units)


def restricted_three_body() -> Hamiltonian:
    """The planar circular restricted three-body problem in the rotating frame,

    H = (px^2 + py^2)/2 + y px - x py - (1 - mu)/r1 - mu/r2,
    r1 = |(x, y) - (-mu, 0)|,  r2 = |(x, y) - (1 - mu, 0)|,

    in units where the primaries' separation, their total mass and their angular velocity
    are 1. ``mu`` is the mass ratio of the smaller primary (0 < mu <= 1/2). H is the
    negative half of the Jacobi constant. State ``(x, y, px, py)``.

    Source: V. Szebehely, *Theory of Orbits: The Restricted Problem of Three Bodies*
    (Academic Press, 1967).
    """
    x, y, px, py, mu = _real("x y px py mu")
    r1 = sp.sqrt((x + mu)**2 + y**2)
    r2 = sp.sqrt((x - 1 + mu)**2 + y**2)
    H = (px**2 + py**2) / 2 + y * px - x * py - (1 - mu) / r1 - mu / r2
    return Hamiltonian(H, [x, y], [px, py], params={mu: (0.01, (0.0, 0.5))},
                       name="restricted_three_body")


def spatial_restricted_three_body() -> Hamiltonian:
    """The spatial circular restricted three-body problem in the rotating frame,

    H = (px^2 + py^2 + pz^2)/2 + y px - x py - (1 - mu)/r1 - mu/r2,
    r1 = |(x, y, z) - (-mu, 0, 0)|,  r2 = |(x, y, z) - (1 - mu, 0, 0)|,

    in the units of :func:`restricted_three_body` (the primaries' separation, their total
    mass and their angular velocity are 1; ``mu`` the mass ratio of the smaller primary,
    0 < mu <= 1/2). The plane z = pz = 0 is invariant and carries the planar problem; H is
    the negative half of the Jacobi constant. State ``(x, y, z, px, py, pz)``.

    Source: V. Szebehely, *Theory of Orbits: The Restricted Problem of Three Bodies*
    (Academic Press, 1967).
    """
    x, y, z, px, py, pz, mu = _real("x y z px py pz mu")
    r1 = sp.sqrt((x + mu)**2 + y**2 + z**2)
    r2 = sp.sqrt((x - 1 + mu)**2 + y**2 + z**2)
    H = (px**2 + py**2 + pz**2) / 2 + y * px - x * py - (1 - mu) / r1 - mu / r2
    return Hamiltonian(H, [x, y, z], [px, py, pz], params={mu: (0.01, (0.0, 0.5))},
                       name="spatial_restricted_three_body")


def toda_lattice(n: int = 3) -> Hamiltonian:
    """The periodic Toda lattice of ``n`` unit masses,

    H = sum_i p_i^2 / 2 + sum_i (a/b) (exp(-b (q_{i+1} - q_i)) - 1),  q_{n+1} = q_1.

    The linear term ``a r`` of the Toda potential (a/b) exp(-b r) + a r sums to zero around
    a ring and the constant ``-a/b`` per bond puts the minimum of the potential at 0. The
    system is integrable; the total momentum is conserved.

    Parameters
    ----------
    n : int
        Number of particles (at least 2).

    Source: M. Toda, "Vibration of a chain with nonlinear interaction", J. Phys. Soc. Jpn.
    22, 431 (1967).
    """
    n = _count(n, 2, "toda_lattice")
    q = _real(f"q1:{n + 1}")
    p = _real(f"p1:{n + 1}")
    a, b = _real("a b")
    V = sum((a / b) * (sp.exp(-b * (q[(i + 1) % n] - q[i])) - 1) for i in range(n))
    H = sum(pi**2 for pi in p) / 2 + V
    return Hamiltonian(H, q, p, params={a: (1.0, (0.1, 5.0)), b: (1.0, (0.1, 5.0))},
                       name=f"toda_lattice_{n}")


def fput_chain(n: int = 16) -> Hamiltonian:
    """The Fermi-Pasta-Ulam-Tsingou alpha chain with fixed ends,

    H = sum_i p_i^2 / 2 + sum_{i=0}^{n} [ (q_{i+1} - q_i)^2 / 2 + alpha (q_{i+1} - q_i)^3 / 3 ],
    q_0 = q_{n+1} = 0,

    for ``n`` moving unit masses joined by springs with a quadratic nonlinearity of
    strength ``alpha``.

    Parameters
    ----------
    n : int
        Number of moving particles (at least 1).

    Source: E. Fermi, J. Pasta and S. Ulam, "Studies of nonlinear problems", Los Alamos
    report LA-1940 (1955).
    """
    n = _count(n, 1, "fput_chain")
    q = _real(f"q1:{n + 1}")
    p = _real(f"p1:{n + 1}")
    alpha = sp.Symbol("alpha", real=True)
    ends = (sp.S.Zero,) + tuple(q) + (sp.S.Zero,)
    V = sum((ends[i + 1] - ends[i])**2 / 2 + alpha * (ends[i + 1] - ends[i])**3 / 3
            for i in range(n + 1))
    H = sum(pi**2 for pi in p) / 2 + V
    return Hamiltonian(H, q, p, params={alpha: (0.25, (0.0, 2.0))}, name=f"fput_chain_{n}")


def driven_pendulum() -> Hamiltonian:
    """A pendulum whose pivot is shaken vertically,

    H = p^2/2 - (omega0^2 + eps cos(Omega t)) cos(q),

    with ``q`` the angle from the downward vertical, ``omega0`` the small-oscillation
    frequency, ``eps`` the driving strength (pivot amplitude times Omega^2 over the length)
    and ``Omega`` the driving frequency. H depends on time with period 2 pi / Omega (the
    system's ``period``), so stroboscopic sections sample it once per period; compiled
    kernels use ``.extended()``. ``q`` is declared an angle of period 2 pi (the model is
    dimensionless: no units are declared).

    Source: L. D. Landau and E. M. Lifshitz, *Mechanics*, 3rd ed. (Pergamon, 1976), §30
    (a pendulum with a vibrating point of support); parametric resonance in §27.
    """
    q, p, t, w0, eps, W = _real("q p t omega0 eps Omega")
    H = p**2 / 2 - (w0**2 + eps * sp.cos(W * t)) * sp.cos(q)
    return Hamiltonian(H, [q], [p], params={w0: (1.0, (0.1, 3.0)), eps: (0.5, (0.0, 5.0)),
                                            W: (2.0, (0.1, 10.0))},
                       time=t, period=2 * sp.pi / W, name="driven_pendulum", angles={q: 2 * sp.pi})


def standard_map() -> AreaPreservingMap:
    """The standard map, applied as a kick then a drift,

    p' = p + K sin(q),   q' = q + p',

    with both ``q`` and ``p`` wrapped into [0, 2 pi). ``K`` is the kick strength; the
    default 0.9716 is close to the value where the last invariant circle spanning the
    cylinder breaks up (recalled from memory). The map is reversible: R(q, p) =
    (-q, p + K sin q) is an involution with R M R = M^-1 (its fixed lines q = 0 and q = pi
    carry the symmetric periodic orbits of Greene's method).

    Source: B. V. Chirikov, "A universal instability of many-dimensional oscillator
    systems", Phys. Rep. 52, 263 (1979).
    """
    q, p, K = _real("q p K")
    two_pi = 2 * sp.pi
    return AreaPreservingMap([(p, p + K * sp.sin(q)), (q, q + p)], [q], [p],
                             params={K: (0.9716, (0.0, 5.0))}, modulus=two_pi, name="standard_map",
                             reversor=[-q, p + K * sp.sin(q)])


def _count(n, low: int, who: str) -> int:
    if isinstance(n, bool) or not isinstance(n, int) or n < low:
        raise ModelError(f"{who}: n must be an integer >= {low}, got {n!r}")
    return n


#: name -> function, for menus and study files
MODELS = {
    "pendulum": pendulum,
    "henon_heiles": henon_heiles,
    "kepler": kepler,
    "double_pendulum": double_pendulum,
    "restricted_three_body": restricted_three_body,
    "spatial_restricted_three_body": spatial_restricted_three_body,
    "toda_lattice": toda_lattice,
    "fput_chain": fput_chain,
    "driven_pendulum": driven_pendulum,
    "standard_map": standard_map,
}


def available() -> list[str]:
    """Names of the catalogue's models."""
    return list(MODELS)
