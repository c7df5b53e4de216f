# %% tags=["parameters"]
# Every number this notebook uses. A rotor on a test stand gets a short hammer blow once per
# turn; between blows it spins freely. Angle and momentum are taken modulo 2 pi.
kicks = [0.4, 0.9, 1.6, 3.0]     # kick strengths
grid = 6                 # seeds per axis of the sections (grid x grid orbits)
iterates = 300           # kicks recorded per orbit (and kicks of the MEGNO maps)
chaos_grid = 32          # seeds per axis of the MEGNO maps over the whole cylinder
megno_threshold = 3.0    # orbits with a MEGNO above this are counted as chaotic
figure_dpi = 110         # resolution of the PNG figures
out_dir = "rotor_output"

# %% [markdown]
# # A kicked rotor: islands and a chaotic sea
#
# The kick-then-drift map $p' = p + K \sin q$, $q' = q + p'$ (both mod $2\pi$) is
# area-preserving. For small $K$ most orbits lie on invariant curves spanning the cylinder;
# as $K$ grows they break, and islands are left in a chaotic sea.

# %%
import numpy as np

import gallery_tools as gt
import phaselab

gt.output_folder(out_dir)

# %%
rotor = phaselab.AreaPreservingMap([("p", "p + K*sin(q)"), ("q", "q + p")], ["q"], ["p"],
                                   params={"K": kicks[0]}, modulus="2*pi", name="kicked rotor")
print(rotor.area_check, "check: Jacobian determinant", rotor.determinant)
qq, pp = np.meshgrid(np.linspace(0.1, 2 * np.pi - 0.1, int(grid)), np.linspace(0.1, 2 * np.pi - 0.1, int(grid)),
                     indexing="ij")
seeds = np.column_stack([qq.ravel(), pp.ravel()])
sections = {K: phaselab.section(rotor, seeds, crossings=int(iterates), params={"K": K}) for K in kicks}
files = []
for K, sec in sections.items():
    tag = f"{K:.2f}".replace(".", "p")
    files += gt.save_and_show(sec, out_dir, f"rotor_K{tag}", (".png", ".csv"), dpi=figure_dpi, point_size=0.9,
                              size=(5.5, 4.6), title=f"Kicked rotor, K = {K:g}")
files += gt.save_and_show(sections[kicks[-1]], out_dir, "rotor_strongest", (".svg",), show=False, point_size=0.9)

# %% [markdown]
# Fixed points: $(q, p) = (\pi, 0)$ is elliptic while the trace of the Jacobian,
# $2 - K$, lies in $(-2, 2)$, i.e. for $0 < K < 4$; $(0, 0)$ is always hyperbolic.

# %%
fixed = {}
for K in kicks:
    pts = phaselab.equilibria(rotor, params={"K": K})
    fixed[K] = [(round(float(e.state[0]), 6), round(float(e.state[1]), 6), e.stability) for e in pts]
    print(f"K = {K:g}:", fixed[K])

# %% [markdown]
# ## How much of the cylinder is chaotic
#
# The MEGNO of an orbit (Cincotta & Simo 2000) tends to 2 on an invariant curve and grows
# like $\lambda n / 2$ after $n$ kicks on a chaotic orbit with Lyapunov exponent $\lambda$.
# Computed for seeds on a grid over the whole cylinder, the fraction above the threshold is
# the chaotic share of the phase space.

# %%
cells = (np.arange(int(chaos_grid)) + 0.5) * 2 * np.pi / int(chaos_grid)   # cell centres
chaos_seeds = phaselab.state_grid(rotor, {"q": (cells[0], cells[-1], len(cells)),
                                          "p": (cells[0], cells[-1], len(cells))})
chaos_maps = {K: phaselab.chaos_map(rotor, chaos_seeds, int(iterates), indicator="megno", params={"K": K})
              for K in kicks}
sea = {K: gt.chaotic_fraction(cm.values, megno_threshold) for K, cm in chaos_maps.items()}
for K, f in sea.items():
    print(f"K = {K:g}: chaotic fraction {f:.1%}")
fig = gt.megno_panels([chaos_maps[K] for K in kicks], [f"K = {K:g}: {sea[K]:.1%} chaotic" for K in kicks],
                      "q", "p", threshold=megno_threshold)
files += gt.save_and_show(fig, out_dir, "rotor_megno", (".png", ".svg"), dpi=figure_dpi)

# %%
gt.write_summary(out_dir, kicks=list(map(float, kicks)), chaotic_fraction=[sea[K] for K in kicks],
                 iterates=int(iterates), megno_threshold=float(megno_threshold),
                 chaos_seeds=chaos_seeds.states, megno=[chaos_maps[K].values for K in kicks],
                 fixed_points={str(K): v for K, v in fixed.items()},
                 points=[int(sections[K].counts.sum()) for K in kicks])
[f.name for f in files]
