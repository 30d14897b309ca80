"""Cylindrical wavelet scattering of chunks ([stats.scattering3d]) from `spinflip measure` against an
independent numpy float64 implementation of the DESIGN.md §6 definition at full resolution (numpy.fft is
the reference library), on white noise, a lognormal field and a plane wave, cropped and with
crop = false; plus properties of the definition: ψ̂(0) = 0 (a constant chunk has S1 = S2 = 0), plane
waves along and across the line of sight (closed forms), a 90° rotation about the line of sight, circular
shifts, the order of coefficients and axes, and one-line errors with exit status 2."""
import os
import subprocess

import numpy as np
from scipy.special import ellipe

from common import SPINFLIP, check, close, finish, measure, workdir
from scattering3d_reference import grid_k, pairs, psi_hat, reference

rng = np.random.default_rng(22)


def stats_text(J=4, M=3, crop=True, normalise=False, extra=""):
    return f"""[stats.scattering3d]
transverse_scales = {J}
los_scales = {M}
normalise = {str(normalise).lower()}
crop = {str(crop).lower()}
{extra}"""


def lognormal(shape, slope=-2.0):
    """exp of a Gaussian field with P(k) ∝ k^slope (red, like a cosmological field), unit-variance log."""
    k = np.sqrt(sum(kk ** 2 for kk in grid_k(shape)))
    amp = np.where(k > 0, k, np.inf) ** (slope / 2)
    g = np.real(np.fft.ifftn(np.fft.fftn(rng.standard_normal(shape)) * amp))
    return np.exp(g / g.std()).astype(np.float32)


def run(x, text):
    return measure(x, text)["scattering3d"]


# --- against numpy at full resolution, within the contract's tolerance (DESIGN.md §6):
# |c - c_ref| <= 1e-4 |c_ref| + 1e-6 max|c_ref|, cropped and crop = false.
# 48 x 48 x 64 with the default filters (ρ = 0.5: broad enough that no grid shrinks at this size).
shape = (48, 48, 64)
k1, k2, k3 = grid_k(shape)
wave = np.cos(2 * np.pi * (5 * np.arange(48)[:, None, None] / 48 + 3 * np.arange(48)[None, :, None] / 48
                          + 7 * np.arange(64)[None, None, :] / 64)).astype(np.float32)
fields = {"white noise": rng.standard_normal(shape).astype(np.float32),
          "lognormal": lognormal(shape),
          "plane wave": wave}
worst = 0.0
for name, x in fields.items():
    ref = reference(x, 4, 3)
    for crop in (True, False):
        got = run(x, stats_text(crop=crop))["values"][0]
        close(got, ref, what=f"{name} {shape} J=4 M=3 crop={crop} vs numpy")
        big = np.abs(ref) > 1e-6 * np.abs(ref).max()  # plane wave: most coefficients are ~0
        worst = max(worst, np.max(np.abs(got - ref)[big] / np.abs(ref)[big]))
print(f"worst relative error against numpy (coefficients above the 1e-6 max|c| floor): {worst:.2e}")

# Narrow filters (bandwidth 0.25) on 96 x 96 x 64: the coarsest transverse filter (j = 3) and the
# coarsest line-of-sight filter (m = 2) run on cropped grids (48² across, 32 along),
# and the line-of-sight box is shifted to its centre. Cropped and full differ (the cropped path ran)
# and both are within the contract's tolerance of numpy.
x = lognormal((96, 96, 64))
ref = reference(x, 4, 3, rho=0.25)
vals = {}
for crop in (True, False):
    vals[crop] = run(x, stats_text(crop=crop, extra="bandwidth = 0.25\n"))["values"][0]
    close(vals[crop], ref, what=f"lognormal 96x96x64 bandwidth 0.25 crop={crop} vs numpy")
check(np.any(vals[True] != vals[False]), "bandwidth 0.25: cropped grids in use (cropped and full results differ)")

# a non-square chunk, normalise, and non-default xi0, eta0, bandwidth
x = lognormal((40, 32, 24))
kw = dict(xi0=2.5, eta0=2.0, rho=0.7)
r = run(x, stats_text(3, 2, normalise=True, extra="xi0 = 2.5\neta0 = 2.0\nbandwidth = 0.7\n"))
close(r["values"][0], reference(x, 3, 2, normalise=True, **kw), what="40x32x24 normalise, custom xi0/eta0/bandwidth")
check(r["attrs"]["normalise"] == 1 and r["attrs"]["transverse_scales"] == 3 and r["attrs"]["los_scales"] == 2,
      "group attributes normalise, transverse_scales, los_scales recorded")

# odd sizes on every axis (fftfreq without a Nyquist plane; the r2c half spectrum's last plane is not
# its own mirror)
x = lognormal((27, 25, 23))
for crop in (True, False):
    close(run(x, stats_text(3, 2, crop=crop))["values"][0], reference(x, 3, 2), what=f"odd 27x25x23 crop={crop}")

# --- axes: order, j1, m1, j2, m2 with -1 where unused, in the contract's order
r = run(fields["white noise"], stats_text())
want = [(0, -1, -1, -1, -1)] + [(1, j, m, -1, -1) for j in range(4) for m in range(3)] + \
       [(2, *p) for p in pairs(4, 3)]
got = list(zip(*[r[a].tolist() for a in ("order", "j1", "m1", "j2", "m2")]))
check(got == want, f"axes order/j1/m1/j2/m2 follow the contract ({len(want)} = 1 + 12 + 48 coefficients)")

# --- ψ̂(0) = 0 exactly (definition), so a constant chunk gives S1 = S2 = 0
check(all(psi_hat(0.0, 0.0, 0.0, j, m) == 0.0 for j in range(6) for m in range(6)), "numpy psi_hat(0) == 0")
c = np.full((32, 32, 16), 2.75, np.float32)
v = run(c, stats_text())["values"][0]
check(abs(v[0] - 2.75) < 1e-6 and np.max(np.abs(v[1:])) < 1e-5 * 2.75,
      f"constant chunk: S0 = 2.75, max |S1|,|S2| = {np.max(np.abs(v[1:])):.1e} (< 1e-5 S0: float rounding)")

# --- plane waves (closed forms). Along the line of sight (q = 0): R_j(0) = 0, so S1 = S2 = 0.
# Across it (p = 0): Z_m(0) = 0, likewise. An oblique wave A cos(k·x) gives
# x⋆ψ = (A/2)(a e^{iθ} + b e^{-iθ}), a = ψ̂(k), b = ψ̂(-k) real, so
# S1 = (A/2) mean_θ |a e^{iθ} + b e^{-iθ}| = (A/2)(2/π)(|a| + |b|) E(4|ab|/(|a|+|b|)²)
# (complete elliptic integral of the second kind, scipy.special.ellipe; the mean over the grid's
# equally spaced phases of this smooth periodic function equals the integral to float rounding).
n = (32, 32, 32)
z = np.arange(32)
along = np.broadcast_to(np.cos(2 * np.pi * 3 * z / 32)[None, None, :], n).astype(np.float32)
across = np.broadcast_to(np.cos(2 * np.pi * 4 * z / 32)[:, None, None], n).astype(np.float32)
for name, x in (("along the line of sight", along), ("across it", across)):
    v = run(np.ascontiguousarray(x), stats_text(3, 3))["values"][0]
    check(np.max(np.abs(v[1:])) < 1e-6, f"plane wave {name}: S1 = S2 = 0 (max {np.max(np.abs(v[1:])):.1e})")
A = 1.5
kv = (2 * np.pi * 4 / 32, 2 * np.pi * 2 / 32, 2 * np.pi * 5 / 32)
idx = np.meshgrid(*[np.arange(s) for s in n], indexing="ij")
oblique = (A * np.cos(sum(k * i for k, i in zip(kv, idx)))).astype(np.float32)
v = run(oblique, stats_text(3, 3))["values"][0]
expect = []
for j in range(3):
    for m in range(3):
        a, b = abs(psi_hat(*kv, j, m)), abs(psi_hat(*[-k for k in kv], j, m))
        expect.append(A / 2 * 2 / np.pi * (a + b) * ellipe(4 * a * b / (a + b) ** 2))
close(v[1:10], expect, what="oblique plane wave S1 equals the elliptic-integral closed form")

# --- a 90° rotation about the line of sight on a square grid leaves every coefficient unchanged
# (R_j is radial and the fftfreq grid maps to itself); float rounding only.
x = lognormal((32, 32, 32))
a = run(x, stats_text(3, 3))["values"][0]
b = run(np.ascontiguousarray(np.rot90(x, axes=(0, 1))), stats_text(3, 3))["values"][0]
close(b, a, rel=1e-5, what="rot90 about the line of sight leaves S0, S1, S2 unchanged")

# --- circular shifts leave every coefficient unchanged (periodic convolution): float rounding at
# full resolution; the contract's 1e-4 when cropped (coarse samples of a shifted field are other
# points of the same envelope).
x = fields["lognormal"]
sh = np.roll(x, (11, -7, 23), axis=(0, 1, 2))
for crop, rel in ((False, 1e-5), (True, 1e-4)):
    a = run(x, stats_text(crop=crop))["values"][0]
    b = run(sh, stats_text(crop=crop))["values"][0]
    close(b, a, rel=rel, what=f"circular shift invariance (crop={crop})")

# --- bad keys and scales that do not fit the chunk: one line naming the key, exit status 2
d = workdir()
src = os.path.join(d, "x.npy")
np.save(src, rng.standard_normal((16, 16, 8)).astype(np.float32))
cases = {"unknown key": ("[stats.scattering3d]\nscales = 3\n", "scales"),
         "zero scales": ("[stats.scattering3d]\nlos_scales = 0\n", "los_scales"),
         "bandwidth out of range": ("[stats.scattering3d]\nbandwidth = -1.0\n", "bandwidth"),
         "transverse scale too coarse": ("[stats.scattering3d]\ntransverse_scales = 4\nlos_scales = 1\n",
                                         "transverse_scales"),
         "line-of-sight scale too coarse": ("[stats.scattering3d]\ntransverse_scales = 1\nlos_scales = 3\n",
                                            "los_scales")}
for name, (text, key) in cases.items():
    toml = os.path.join(d, "s.toml")
    with open(toml, "w") as f:
        f.write(text)
    out = os.path.join(d, "out.h5")
    r = subprocess.run([SPINFLIP, "-q", "measure", src, "--stats", toml, "-o", out], capture_output=True, text=True)
    lines = r.stderr.strip().splitlines()
    check(r.returncode == 2 and len(lines) == 1 and key in lines[0],
          f"{name}: exit {r.returncode}, one line naming {key}: {lines[:1]}")
# a 2D array is refused (the kernel measures chunks)
np.save(src, rng.standard_normal((16, 16)).astype(np.float32))
r = subprocess.run([SPINFLIP, "-q", "measure", src, "--stats", toml, "-o", out], capture_output=True, text=True)
check(r.returncode == 2 and len(r.stderr.strip().splitlines()) == 1, f"2D array refused: {r.stderr.strip()}")
finish()
