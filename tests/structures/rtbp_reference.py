"""Outside references for the restricted three-body tests (test_families.py,
test_branching.py): Hamilton's equations written out by hand, their Jacobian from sympy, a
monodromy matrix from scipy's variational equations, and a start near a planar Lyapunov
orbit about L2 from the linearisation there. None of it uses phaselab."""

import numpy as np
import sympy as sp
from scipy.integrate import solve_ivp
from scipy.optimize import brentq

MU = 0.01215
"""A mass ratio near the Earth-Moon value (the scenario: a moon of an invented planet)."""


# ----------------------------------------------------------------------------- references
def rtbp_field(z, mu=MU):
    """Hamilton's equations of the spatial restricted three-body problem in the rotating
    frame, written out by hand from H = |p|^2/2 + y px - x py - (1-mu)/r1 - mu/r2
    (Szebehely 1967); also the planar problem for a state of length 4."""
    planar = len(z) == 4
    if planar:
        x, y, px, py = z
        zz = pz = 0.0
    else:
        x, y, zz, px, py, pz = z
    r1 = np.sqrt((x + mu) ** 2 + y ** 2 + zz ** 2)
    r2 = np.sqrt((x - 1 + mu) ** 2 + y ** 2 + zz ** 2)
    a1, a2 = (1 - mu) / r1 ** 3, mu / r2 ** 3
    dx, dy, dz = px + y, py - x, pz
    dpx = py - a1 * (x + mu) - a2 * (x - 1 + mu)
    dpy = -px - a1 * y - a2 * y
    dpz = -a1 * zz - a2 * zz
    return np.array([dx, dy, dpx, dpy]) if planar else np.array([dx, dy, dz, dpx, dpy, dpz])


def rtbp_jacobian(z, mu=MU):
    """d(field)/dz of the spatial problem (6 x 6), from a sympy derivative of the hand-written
    Hamiltonian (independent of phaselab's kernels)."""
    return _JAC(*z, mu)


def _sympy_jacobian():
    x, y, zz, px, py, pz, mu = sp.symbols("x y z px py pz mu", real=True)
    r1 = sp.sqrt((x + mu) ** 2 + y ** 2 + zz ** 2)
    r2 = sp.sqrt((x - 1 + mu) ** 2 + y ** 2 + zz ** 2)
    H = (px ** 2 + py ** 2 + pz ** 2) / 2 + y * px - x * py - (1 - mu) / r1 - mu / r2
    q, p = [x, y, zz], [px, py, pz]
    f = sp.Matrix([sp.diff(H, v) for v in p] + [-sp.diff(H, v) for v in q])
    return sp.lambdify((x, y, zz, px, py, pz, mu), f.jacobian(q + p), "numpy")


_JAC = _sympy_jacobian()


def scipy_monodromy(z0, period):
    """The state after one period and the monodromy matrix of the spatial problem from the
    variational equations dPhi/dt = Df(z) Phi, integrated by scipy's DOP853."""
    def rhs(t, w):
        z, phi = w[:6], w[6:].reshape(6, 6)
        return np.concatenate([rtbp_field(z), (rtbp_jacobian(z) @ phi).ravel()])

    w0 = np.concatenate([z0, np.eye(6).ravel()])
    sol = solve_ivp(rhs, (0.0, period), w0, method="DOP853", rtol=1e-12, atol=1e-12)
    return sol.y[:6, -1], sol.y[6:, -1].reshape(6, 6)


def lyapunov_guess(dof, amplitude=0.005, mu=MU):
    """A state near a planar Lyapunov orbit about L2 from the linearisation at L2 (its
    oscillating eigenvector, scaled to the amplitude in x), and the crossing direction."""
    def ux(x):
        return x - (1 - mu) * (x + mu) / abs(x + mu) ** 3 - mu * (x - 1 + mu) / abs(x - 1 + mu) ** 3

    xl = brentq(ux, 1 - mu + 1e-3, 2.0)
    c2 = (1 - mu) / abs(xl + mu) ** 3 + mu / abs(xl - 1 + mu) ** 3
    A = np.array([[0, 0, 1, 0], [0, 0, 0, 1], [1 + 2 * c2, 0, 0, 2], [0, 1 - c2, -2, 0]])
    w, V = np.linalg.eig(A)
    v = V[:, np.argmax(np.abs(w.imag))]
    v = (v * 1j * abs(v[1]) / v[1]).real          # start on y = 0
    dx, _, dvx, dvy = amplitude * v / abs(v[0])
    z = np.zeros(2 * dof)
    z[0], z[dof], z[dof + 1] = xl + dx, dvx, xl + dx + dvy      # px = vx - y, py = vy + x
    return z, (1 if dvy > 0 else -1)
