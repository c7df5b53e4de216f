# %% tags=["parameters"]
# Every number this notebook uses. A lab rig of our own: a slider of mass m runs without
# friction on a vertical ring of radius R that a motor spins about its vertical diameter.
g = 9.81                 # m/s^2
R = 0.25                 # ring radius, m
m = 0.05                 # slider mass, kg
spin_sweep = (0.0, 12.0, 25)        # spin rates for the equilibrium sweep: low, high, count (rad/s)
portrait_spins = [4.0, 7.0, 10.0]   # spin rates of the phase portraits (rad/s)
portrait_levels = 9                 # contour levels per portrait
resolution = 160                    # grid points per axis of the level sets
ripple = 0.04            # relative ripple of the motor speed, for the stroboscopic section
ripple_spin = 10.0       # mean spin rate of the rippling motor (rad/s)
ripple_rate = 2.3        # ripple frequency over the small-oscillation frequency of the tilted slider
n_seeds = 10             # orbits of the stroboscopic section
periods = 120            # ripple periods recorded per orbit
dt = 0.004               # step, s
figure_dpi = 110         # resolution of the PNG figures
out_dir = "bead_output"  # where figures and data go

# %% [markdown]
# # A slider on a spinning ring
#
# A slider moves on a ring of radius $R$ spinning at rate $\omega$ about its vertical
# diameter. With $\theta$ the angle from the bottom, the Lagrangian is
#
# $$L = \tfrac12 m R^2 (\dot\theta^2 + \omega^2 \sin^2\theta) + m g R \cos\theta .$$
#
# phaselab builds the Hamiltonian by the Legendre transform. Below the critical rate
# $\omega_c = \sqrt{g/R}$ the bottom is the only stable rest point; above it the bottom turns
# hyperbolic and two tilted rest points at $\cos\theta^* = g/(R\omega^2)$ take over.

# %%
import numpy as np
from IPython.display import display
from matplotlib.figure import Figure

import gallery_tools as gt
import phaselab

gt.output_folder(out_dir)

# %%
hoop = phaselab.Hamiltonian.from_lagrangian(
    "m*R**2*(thd**2 + w**2*sin(th)**2)/2 + m*g*R*cos(th)", ["th"], ["thd"],
    params={"m": m, "R": R, "g": g, "w": portrait_spins[0]}, momenta=["p"], name="slider on a spinning ring")
hoop

# %%
for eq in hoop.equations():
    display(eq)

# %% [markdown]
# ## Rest points as the spin rate grows

# %%
critical = np.sqrt(g / R)
spins = np.linspace(*spin_sweep[:2], int(spin_sweep[2]))
tilted_angle = []
stable_count = []
for w in spins:
    eqs = phaselab.equilibria(hoop, params={"w": w}, ranges={"th": (-np.pi, np.pi), "p": (-1, 1)})
    stable = [e for e in eqs if e.stability == "elliptic"]
    stable_count.append(len(stable))
    tilted = [abs(e.state[0]) for e in stable if abs(e.state[0]) > 1e-6]
    tilted_angle.append(max(tilted) if tilted else 0.0)
tilted_angle = np.array(tilted_angle)
# the closed form cos(theta*) = g / (R w^2) above the critical rate, for comparison
theory = np.where(spins > critical, np.arccos(np.minimum(1.0, g / (R * np.maximum(spins, 1e-9)**2))), 0.0)
print(f"critical spin rate sqrt(g/R) = {critical:.4f} rad/s")
print(f"largest gap to the closed form: {np.max(np.abs(tilted_angle - theory)):.2e} rad")

fig = Figure(figsize=(5.5, 3.4))
ax = fig.subplots()
ax.plot(spins, np.degrees(tilted_angle), "o", ms=4, color="#2b5d7d", label="phaselab.equilibria")
ax.plot(spins, np.degrees(theory), "-", lw=1, color="#d2824b", label="arccos(g / R w^2)")
ax.axvline(critical, color="#888888", lw=0.8, ls=":")
ax.set_xlabel("spin rate w (rad/s)")
ax.set_ylabel("stable tilt angle (deg)")
ax.legend(frameon=False)
fig.tight_layout()
files = gt.save_and_show(fig, out_dir, "rest_points", dpi=figure_dpi)

# %% [markdown]
# ## Phase portraits from level sets of H

# %%
fig = Figure(figsize=(4.0 * len(portrait_spins), 3.4))
axes = fig.subplots(1, len(portrait_spins), squeeze=False)[0]
pmax = m * R**2 * max(portrait_spins) * 1.6
separatrix_energy = {}
for ax, w in zip(axes, portrait_spins):
    bottom = hoop.energy([0.0, 0.0], params={"w": w})
    levels = np.linspace(bottom, bottom + 2.5 * m * g * R, int(portrait_levels))[1:]
    ls = phaselab.level_set(hoop, {"th": (-np.pi, np.pi), "p": (-pmax, pmax)}, levels,
                            params={"w": w}, resolution=int(resolution), separatrices=True)
    for pieces in ls.lines:
        for line in pieces:
            ax.plot(line[:, 0], line[:, 1], lw=0.8, color="#2b5d7d")
    for sep in ls.separatrices:
        separatrix_energy.setdefault(float(w), []).append(sep.energy)
        for line in sep.lines:
            ax.plot(line[:, 0], line[:, 1], lw=1.4, color="#d2824b")
    ax.set_title(f"w = {w:g} rad/s ({'above' if w > critical else 'below'} critical)", fontsize=9)
    ax.set_xlabel("theta (rad)")
axes[0].set_ylabel("p (kg m^2/s)")
fig.tight_layout()
files += gt.save_and_show(fig, out_dir, "portraits", dpi=figure_dpi)

# %% [markdown]
# ## A rippling motor: once per ripple period
#
# A real motor's speed ripples. With $\omega(t) = \bar\omega (1 + \epsilon \cos \nu t)$ the
# slider is driven near the tilted rest point; sampled once per ripple period, orbits near it
# draw closed curves and resonance chains.

# %%
wt = np.sqrt(ripple_spin**2 - g**2 / (R**2 * ripple_spin**2))   # small-oscillation rate at the tilt
nu = ripple_rate * wt
rippling = phaselab.Hamiltonian.from_lagrangian(
    "m*R**2*(thd**2 + (w*(1 + eps*cos(nu*t)))**2*sin(th)**2)/2 + m*g*R*cos(th)",
    ["th"], ["thd"], params={"m": m, "R": R, "g": g, "w": ripple_spin, "eps": ripple, "nu": nu},
    time="t", period="2*pi/nu", momenta=["p"], name="slider on a rippling ring")
tilt = np.arccos(g / (R * ripple_spin**2))
seeds = np.column_stack([np.linspace(tilt - 0.9, tilt + 0.9, int(n_seeds)), np.zeros(int(n_seeds))])
strobe = phaselab.section(rippling, seeds, plane="stroboscopic", crossings=int(periods), dt=dt)
strobe

# %%
files += gt.save_and_show(strobe, out_dir, "ripple_section", (".png", ".svg", ".csv"), dpi=figure_dpi,
                          title=f"Slider on a rippling ring, {ripple:.0%} ripple")
gt.write_summary(out_dir, critical_spin=critical, spins=spins, tilted_angle=tilted_angle,
                 stable_count=stable_count, separatrix_energy=separatrix_energy,
                 section_points=int(strobe.counts.sum()),
                 worst_energy_error=float(np.nanmax(np.abs(strobe.energy_error))))
[f.name for f in files]
