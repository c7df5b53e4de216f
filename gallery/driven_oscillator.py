# %% tags=["parameters"]
# Every number this notebook uses. A torsion arm in a teaching lab, restored by gravity on
# an off-centre weight and driven by an alternating coil torque.
w0 = 1.0                 # small-swing frequency of the arm (rad/s)
torque = 0.12            # coil torque amplitude over the arm's inertia
drive = 1.7              # coil frequency (rad/s)
n_seeds = 12             # orbits, started at rest along the angle axis
periods = 150            # drive periods recorded per orbit
max_angle = 2.6          # seeds from -max_angle to +max_angle (rad)
dt = 0.03                # step (shortened to divide the drive period)
method = "yoshida4"
figure_dpi = 150         # resolution of the PNG figure
out_dir = "driven_output"

# %% [markdown]
# # A driven torsion arm: stroboscopic section and resonance islands
#
# $H = \tfrac12 p^2 - \omega_0^2 \cos x - f\, x \cos(\Omega t)$. Sampled once per drive
# period $2\pi/\Omega$, orbits lie on closed curves around the driven periodic motion;
# where a swing's frequency is in resonance with the drive, chains of islands appear.

# %%
import numpy as np
from IPython.display import display

import gallery_tools as gt
import phaselab

gt.output_folder(out_dir)

# %%
arm = phaselab.Hamiltonian("p**2/2 - w0**2*cos(x) - f*x*cos(W*t)", ["x"], ["p"],
                           params={"w0": w0, "f": torque, "W": drive}, time="t", period="2*pi/W",
                           name="driven torsion arm")
for eq in arm.equations():
    display(eq)

# %%
seeds = np.column_stack([np.linspace(-max_angle, max_angle, int(n_seeds)), np.zeros(int(n_seeds))])
strobe = phaselab.section(arm, seeds, plane="stroboscopic", crossings=int(periods), dt=dt, method=method)
files = gt.save_and_show(strobe, out_dir, "driven_section", (".png", ".svg", ".pdf", ".csv"), dpi=figure_dpi,
                         title=f"Driven torsion arm, drive {drive:g} rad/s")
strobe

# %% [markdown]
# Each orbit's mean angle advance per drive period, divided by $2\pi$, is its rotation
# number around the driven motion; orbits with the same rational value belong to one island chain.

# %%
# orbits circle the driven motion, so the mean of one orbit's points estimates where it is
centre = np.nanmean(strobe.points[0, :, :], axis=0)
rotation = []
for k in range(strobe.n_orbits):
    z = strobe.points[k, :strobe.counts[k]]
    ang = np.unwrap(np.arctan2(z[:, 1] - centre[1], z[:, 0] - centre[0]))
    rotation.append(abs(ang[-1] - ang[0]) / (2 * np.pi * max(len(ang) - 1, 1)))
for x0, r in zip(seeds[:, 0], rotation):
    print(f"x0 = {x0:+.2f}: rotation number {r:.4f}")

# %%
gt.write_summary(out_dir, rotation=rotation, points=int(strobe.counts.sum()), dt_used=strobe.dt,
                 mean_square_angle=float(np.nanmean(strobe.points[..., 0] ** 2)),
                 worst_energy_error=float(np.nanmax(np.abs(strobe.energy_error))))
[f.name for f in files]
