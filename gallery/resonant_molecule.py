# %% tags=["parameters"]
# Every number this notebook uses: a made-up molecule whose stretch is tuned near twice its bend.
w_stretch = 2.0          # stretch frequency (mode 1, coordinate x)
w_bend = 1.04            # bend frequency (mode 2, coordinate y): 2 w_bend is 4 % above w_stretch
coupling = 0.03          # cubic stretch-bend coupling kappa x y^2 (the Fermi-type term)
softening = -0.15        # quartic term beta y^4 of the bend (it softens with amplitude)
order = 6                # degree of the normal form
starts = [[0.11, 0.04], [0.12, 0.02]]   # actions (J_stretch, J_bend) of the exchange orbits
exchange_time = 1200.0   # how long the exchange orbits are followed
ray = [0.06, 0.02]       # frequencies are measured at 1/4, 1/2, 3/4 and all of these actions
record = 300.0           # length of each record for Laskar's frequency analysis
near_island = [0.08, 0.1]   # actions from which the island on the resonance is sought
island_orbits = 17       # orbits launched across the island
section_seeds = 14       # orbits of the section at the separatrix energy
crossings = 250          # section points per orbit
dt = 0.025               # step
figure_dpi = 110         # resolution of the PNG figures
out_dir = "resonant_molecule_output"

# %% [markdown]
# # A molecule in Fermi resonance: what the normal form predicts, and the measurement
#
# A toy molecule of our own with a stretch $x$ and a bend $y$, the stretch tuned near twice
# the bend, coupled by a cubic term and with a softening bend:
#
# $$H = \tfrac12(p_x^2+p_y^2) + \tfrac12(\omega_s^2 x^2 + \omega_b^2 y^2) + \kappa\, x y^2 + \beta y^4 .$$
#
# Near $2\omega_b \approx \omega_s$ the term $\kappa x y^2$ cannot be averaged away: the
# resonant normal form keeps the angle $\psi = \phi_1 - 2\phi_2$ (resonance vector
# $k = (1, -2)$), and with it the exchange of energy between the modes and an island chain
# where the detuned bend meets the resonance. Everything below is computed from the normal
# form first, then measured on integrated orbits.

# %%
import numpy as np
from matplotlib.figure import Figure

import gallery_tools as gt
import phaselab

gt.output_folder(out_dir)
molecule = phaselab.Hamiltonian(
    "(px**2 + py**2)/2 + (ws**2*x**2 + wb**2*y**2)/2 + kappa*x*y**2 + beta*y**4", ["x", "y"], ["px", "py"],
    params={"ws": w_stretch, "wb": w_bend, "kappa": coupling, "beta": softening}, name="Fermi molecule")
nf = phaselab.normal_form(molecule, [0, 0, 0, 0], int(order), resonances=[(1, -2)])
print(nf)
print(nf.latex())

# %% [markdown]
# ## Energy exchange between the modes
#
# The resonant form conserves the polyad action $N = 2J_1 + J_2$, so an orbit moves on a
# level curve of $H(J_1 = (N - J_2)/2, J_2, \psi)$: the largest bend action it reaches is read
# off that curve before integrating anything. The orbits are then integrated and read back in
# the normal form's actions (`to_normal`).

# %%
K = np.array([1.0, -2.0])


def predicted_bend_range(J0, psi0=0.0, points=2001, angles=361):
    """Smallest and largest bend action on the level curve through (J0, psi0) at fixed N."""
    N = 2 * J0[0] + J0[1]
    H0 = nf.energy([J0], [psi0 * K / (K @ K)])[0]
    J2 = np.linspace(0.0, N, points)
    psi = np.linspace(-np.pi, np.pi, angles)
    actions = np.stack([np.repeat((N - J2) / 2, angles), np.repeat(J2, angles)], axis=1)
    phases = np.stack([np.tile(psi, points), np.zeros(points * angles)], axis=1)
    H = nf.energy(actions, phases).reshape(points, angles)
    reach = (H.min(axis=1) <= H0) & (H.max(axis=1) >= H0)
    lo = hi = int(np.searchsorted(J2, J0[1]))
    while lo > 0 and reach[lo - 1]:
        lo -= 1
    while hi < points - 1 and reach[hi + 1]:
        hi += 1
    return float(J2[lo]), float(J2[hi])


starts_array = np.array(starts, dtype=float)
track = phaselab.trajectory(molecule, nf.from_normal(starts_array, np.zeros_like(starts_array)), exchange_time,
                            dt=dt, method="yoshida4", save_every=20)
predicted_range, measured_range = [], []
fig = Figure(figsize=(9.0, 3.6), dpi=figure_dpi, layout="constrained")
ax = fig.add_subplot()
for i, J0 in enumerate(starts_array):
    J, _ = nf.to_normal(track.states[i])
    predicted_range.append(predicted_bend_range(J0))
    measured_range.append((float(J[:, 1].min()), float(J[:, 1].max())))
    line, = ax.plot(track.t, J[:, 1], lw=0.8, label=f"start J = ({J0[0]:g}, {J0[1]:g})")
    ax.axhline(predicted_range[-1][1], color=line.get_color(), ls="--", lw=0.8)
    print(f"start {J0}: bend action predicted to reach {predicted_range[-1][1]:.5f}, measured "
          f"{measured_range[-1][1]:.5f}")
ax.set_xlabel("time")
ax.set_ylabel("bend action J2 (normal form)")
ax.set_title("Energy exchange: measured (lines), predicted largest bend action (dashed)")
ax.legend(fontsize=8, frameon=False)
files = gt.save_and_show(fig, out_dir, "exchange", (".png",), dpi=figure_dpi)

# %% [markdown]
# ## Detuning and the island, beside the measurement
#
# `phaselab.normal_form_check` launches orbits at several actions, measures their
# frequencies by Laskar's frequency analysis and sets them beside the normal form's
# $\partial H / \partial J$ (mode 1 the stretch, mode 2 the bend). It also finds the torus
# where the softened bend meets the resonance, predicts the island's width from the
# pendulum model of the resonant form, and measures the island on a section: orbits
# launched across it librate inside and circulate outside.

# %%
rays = np.outer([0.25, 0.5, 0.75, 1.0], ray)
check = phaselab.normal_form_check(molecule, nf, rays, record, samples=2048, dt=dt, method="yoshida4",
                                   island=near_island, island_orbits=int(island_orbits))
print(check)
files += gt.save_and_show(check.plot(title="Fermi molecule: normal form beside measurement"), out_dir,
                          "normal_form_check", (".png", ".svg"), dpi=figure_dpi)
check.save(gt.output_folder(out_dir) / "normal_form_check.nc")

# %% [markdown]
# ## The islands in the usual section
#
# On the resonance the separatrix has one energy. The section $x = 0$ (crossed upwards) at
# that energy shows the island chain; the separatrix the normal form predicts is drawn over
# it (`check.separatrix_curves`: the pendulum model's separatrix carried to $(y, p_y)$ by
# `from_normal` where it crosses $x = 0$).

# %%
island = check.island
x_point = island.center_actions, (island.center_angle + np.pi) * K / (K @ K)
E_sep = float(nf.energy([x_point[0]], [x_point[1]])[0])


ys = np.linspace(-0.55, 0.55, int(section_seeds))     # a line through both islands
seeds = phaselab.shell_seeds(molecule, {"y": ys, "py": 0.8 * ys}, energy=E_sep, plane={"x": 0.0},
                             solve_for="px")
section = phaselab.section(molecule, seeds, plane={"x": 0.0}, crossings=int(crossings), dt=dt, method="yoshida4")
files += gt.save_and_show(section, out_dir, "section_with_separatrix", (".png",), dpi=figure_dpi,
                          overlays=[c[:, [1, 3]] for c in check.separatrix_curves({"x": 0.0})], title=f"x = 0 at the separatrix energy E = {E_sep:.4f}",
                          note="Model results with made-up constants.")

# %%
gt.write_summary(out_dir, omega=nf.omega, starts=starts_array, start_states=track.states[:, 0], predicted_bend_range=predicted_range,
                 measured_bend_range=measured_range, actions=check.actions, predicted=check.predicted,
                 measured=check.measured, island_center=island.center_actions,
                 island_predicted_width=island.predicted_width, island_measured_width=island.measured_width,
                 island_resolution=island.resolution, separatrix_energy=E_sep,
                 params={"ws": w_stretch, "wb": w_bend, "kappa": coupling, "beta": softening})
[f.name for f in files]
