# %% tags=["parameters"]
# Every number this notebook uses. A bench model of a string of equal masses joined by
# slightly nonlinear springs, both ends clamped.
n_masses = 8             # moving masses
alpha = 0.25             # quadratic spring nonlinearity
mode = 1                 # the normal mode that holds all the energy at the start
amplitude = 1.0          # its initial amplitude (mode coordinate)
t_end = 1500.0           # run time (units of 1 / spring frequency)
samples = 600            # samples kept along the run
dt = 0.05                # step
shown_modes = 4          # mode energies plotted
figure_dpi = 110         # resolution of the PNG figures
out_dir = "chain_output"

# %% [markdown]
# # A chain of coupled oscillators: energy sharing among modes
#
# $n$ unit masses on springs with a cubic term in the potential,
# $H = \sum p_i^2/2 + \sum_{i=0}^{n} [(q_{i+1}-q_i)^2/2 + \alpha (q_{i+1}-q_i)^3/3]$, ends fixed.
# All energy starts in one normal mode; the nonlinearity passes it to the others, and for
# small amplitudes it comes back almost completely after a while.

# %%
import numpy as np
from matplotlib.figure import Figure

import gallery_tools as gt
import phaselab

folder = gt.output_folder(out_dir)

# %%
chain = phaselab.models.fput_chain(n=int(n_masses))
N = int(n_masses)
j = np.arange(1, N + 1)
k = np.arange(1, N + 1)
modes = np.sqrt(2 / (N + 1)) * np.sin(np.outer(j, k) * np.pi / (N + 1))   # orthogonal, symmetric
omega = 2 * np.sin(k * np.pi / (2 * (N + 1)))
state0 = np.zeros(2 * N)
state0[:N] = amplitude * modes[:, mode - 1]
run = phaselab.trajectory(chain, state0, t_end, dt=dt, params={"alpha": alpha},
                          save_every=max(1, int(round(t_end / dt / samples))))
run

# %%
q = run.states[0, :, :N]
p = run.states[0, :, N:]
Q = q @ modes
P = p @ modes
mode_energy = 0.5 * (P**2 + (omega * Q)**2)       # harmonic energy of each normal mode
share = mode_energy / mode_energy.sum(axis=1, keepdims=True)
print(f"largest energy error along the run: {np.nanmax(np.abs(run.energy_error)):.2e}")
print(f"lowest share left in mode {mode}: {share[:, mode - 1].min():.3f}")

fig = Figure(figsize=(6.5, 3.4))
ax = fig.subplots()
palette = ["#2b5d7d", "#d2824b", "#5c8f4e", "#9e4a6e", "#e0b64a", "#3f9a96"]
for m_ in range(min(int(shown_modes), N)):
    ax.plot(run.t, mode_energy[:, m_], lw=1, color=palette[m_ % len(palette)], label=f"mode {m_ + 1}")
ax.set_xlabel("t")
ax.set_ylabel("mode energy")
ax.legend(frameon=False, fontsize=8, ncol=2)
ax.set_title(f"{N} masses, alpha = {alpha:g}: energy among the normal modes", fontsize=9)
fig.tight_layout()
files = gt.save_and_show(fig, out_dir, "mode_energies", (".png", ".svg"), dpi=figure_dpi)
header = "t," + ",".join(f"mode{m_ + 1}" for m_ in range(N))
files.append(gt.write_atomically(folder / "mode_energies.csv", lambda tmp: np.savetxt(
    tmp, np.column_stack([run.t, mode_energy]), delimiter=",", header=header, comments="")))

# %% [markdown]
# A surface of section of the same run's neighbourhood: orbits started with the energy in the
# chosen mode at a few amplitudes, recorded when the first mass passes its rest position
# moving right, shown in the middle mass's coordinates.

# %%
amps = amplitude * np.linspace(0.4, 1.0, 4)
starts = np.zeros((len(amps), 2 * N))
starts[:, :N] = amps[:, None] * modes[:, mode - 1][None, :]
starts[:, N] = 1e-3       # a small push so the first mass crosses q1 = 0 moving right
sec = phaselab.section(chain, starts, plane={"q1": 0.0}, crossings=60, dt=dt, params={"alpha": alpha},
                       axes=(f"q{N // 2}", f"p{N // 2}"))
files += gt.save_and_show(sec, out_dir, "chain_section", (".png", ".svg", ".csv"), dpi=figure_dpi,
                          title="Oscillator chain, section q1 = 0")
gt.write_summary(out_dir, lowest_share=float(share[:, mode - 1].min()), final_share=share[-1],
                 worst_energy_error=float(np.nanmax(np.abs(run.energy_error))),
                 section_points=int(sec.counts.sum()))
[f.name for f in files]
