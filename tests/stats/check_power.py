"""Power spectra of `spinflip measure` against a numpy FFT reference estimator
written here from the DESIGN.md §6 formulas (numpy.fft is the reference
library), Parseval's theorem, and recovery of a known power law from a
Gaussian random field within cosmic variance."""
import numpy as np

from common import check, close, finish, measure

rng = np.random.default_rng(20261202)


def kgrid(shape, cell):
    ks = np.meshgrid(*[2 * np.pi * np.fft.fftfreq(n, d=cell) for n in shape], indexing="ij")
    return ks


def reference_spherical(x, cell, edges):
    """P̂ = ΔV |Σ x e^{-ikx}|² / N on the full grid, binned over k_lo <= |k| < k_hi, k = 0 excluded."""
    x = x.astype(np.float64)
    dv = cell ** x.ndim
    p = dv * np.abs(np.fft.fftn(x)) ** 2 / x.size
    k = np.sqrt(sum(kk ** 2 for kk in kgrid(x.shape, cell)))
    power = 3 if x.ndim == 3 else 2
    norm = 2 * np.pi ** 2 if x.ndim == 3 else 2 * np.pi
    P, D, KM, NM = [], [], [], []
    for lo, hi in zip(edges[:-1], edges[1:]):
        m = (k >= lo) & (k < hi) & (k > 0)
        NM.append(m.sum())
        P.append(p[m].mean() if m.any() else np.nan)
        D.append((k[m] ** power * p[m]).mean() / norm if m.any() else np.nan)
        KM.append(k[m].mean() if m.any() else np.nan)
    return np.array(P), np.array(D), np.array(KM), np.array(NM)


def nongaussian(shape):
    # A lognormal-like field with a few bright spots: non-Gaussian and anisotropic enough to catch axis mix-ups.
    g = rng.standard_normal(shape)
    f = np.fft.fftn(g)
    k = np.sqrt(sum(kk ** 2 for kk in kgrid(shape, 1.0)))
    f *= np.exp(-(k / 0.8) ** 2)
    x = np.exp(np.real(np.fft.ifftn(f)) * 3.0)
    x[tuple(rng.integers(0, s) for s in shape)] += 20.0
    return x.astype(np.float32)


# --- 3D spherical + cylindrical on a non-cubic cube, log and linear bins
cube = nongaussian((24, 20, 36))
cell = 1.5
edges = np.geomspace(0.1, 3.5, 9)
res = measure(cube, f"""
[stats.power]
bins = 8
k_min_mpc = 0.1
k_max_mpc = 3.5
log_bins = true
[stats.cylindrical]
kperp_bins = 5
kpar_bins = 4
kperp_min_mpc = 0.2
kperp_max_mpc = 2.5
kpar_min_mpc = 0.0001
kpar_max_mpc = 2.0
log_bins = false
""", cell_mpc=cell)
P, D, KM, NM = reference_spherical(cube, cell, edges)
pw = res["power"]
check(pw["values"].shape == (1, 16), f"power values shape {pw['values'].shape} == (1, 16)")
close(pw["values"][0, :8], P, what="3D P(k) vs numpy reference")
close(pw["values"][0, 8:], D, what="3D delta2(k) vs numpy reference")
close(pw["k_mean"][:8], KM, rel=1e-6, what="3D k_mean vs numpy")
check(np.array_equal(pw["n_modes"][:8], NM), "3D n_modes equal numpy's full-grid count")
close(pw["k_lo"][:8], edges[:-1], rel=1e-12, what="k_lo edges geometric")

# cylindrical: k_perp from axes 0,1, k_par = |k3|, only k = 0 excluded
x = cube.astype(np.float64)
p = cell ** 3 * np.abs(np.fft.fftn(x)) ** 2 / x.size
k1, k2, k3 = kgrid(cube.shape, cell)
kperp, kpar = np.sqrt(k1 ** 2 + k2 ** 2), np.abs(k3)
pe, qe = np.linspace(0.2, 2.5, 6), np.linspace(0.0001, 2.0, 5)
ref, nref = [], []
for a in range(5):
    for b in range(4):
        m = (kperp >= pe[a]) & (kperp < pe[a + 1]) & (kpar >= qe[b]) & (kpar < qe[b + 1])
        m &= (kperp > 0) | (kpar > 0)
        nref.append(m.sum())
        ref.append(p[m].mean() if m.any() else np.nan)
cy = res["cylindrical"]
close(cy["values"][0], ref, what="cylindrical P(kperp, kpar) vs numpy reference (kperp-major)")
check(np.array_equal(cy["n_modes"], nref), "cylindrical n_modes equal numpy's count")

# k_par = 0 plane is kept: a kpar bin starting at 0 must include modes with k3 = 0
res0 = measure(cube, """
[stats.cylindrical]
kperp_bins = 2
kpar_bins = 2
kperp_min_mpc = 0.3
kperp_max_mpc = 2.0
kpar_min_mpc = 0.0000001
kpar_max_mpc = 0.5
log_bins = false
""", cell_mpc=cell)
check(res0["cylindrical"]["n_modes"].sum() > 0, "cylindrical bins populated")

# --- 2D slice power, odd sizes, linear bins, no cell size (radians per cell)
img = nongaussian((45, 64))
edges2 = np.linspace(0.05, 3.0, 11)
r2 = measure(img, """
[stats.slice_power]
bins = 10
k_min_mpc = 0.05
k_max_mpc = 3.0
log_bins = false
""")
P2, D2, KM2, NM2 = reference_spherical(img, 1.0, edges2)
sp = r2["slice_power"]
close(sp["values"][0, :10], P2, what="2D P(k) vs numpy reference (45x64, odd axis)")
close(sp["values"][0, 10:], D2, what="2D delta2(k) vs numpy reference")
check(np.array_equal(sp["n_modes"][:10], NM2), "2D n_modes equal numpy's full-grid count")

# --- Parseval (common practice): one bin over every k != 0 mode gives
# P_mean n_modes = Σ_k≠0 P̂ = ΔV N var(x).
c2 = cube.astype(np.float64)
rp = measure(cube, """
[stats.power]
bins = 1
k_min_mpc = 1e-6
k_max_mpc = 100.0
""", cell_mpc=cell)
lhs = rp["power"]["values"][0, 0] * rp["power"]["n_modes"][0]
rhs = cell ** 3 * c2.size * c2.var()
check(abs(lhs / rhs - 1) < 1e-5, f"Parseval: sum of P over all k!=0 modes / (dV N var) = {lhs / rhs:.8f} (float32 FFT rounding: 1e-5)")
check(rp["power"]["n_modes"][0] == cube.size - 1, "one wide bin holds every mode but k = 0")

# --- Gaussian random field with P(k) = A k^-2 (3D, 64x64x96, cell 2 Mpc): each bin
# within 4 sigma of cosmic variance, sigma/P = 1/sqrt(n_modes/2) (a full-grid pair ±k is one mode).
shape, cell = (64, 64, 96), 2.0
k = np.sqrt(sum(kk ** 2 for kk in kgrid(shape, cell)))
A = 50.0
model = np.where(k > 0, A * np.where(k > 0, k, 1.0) ** -2.0, 0.0)
# <|δ̃|²> = V P with δ̃ = ΔV FFT(x): scale the white field's transform by sqrt(P / ΔV).
field = np.real(np.fft.ifftn(np.fft.fftn(rng.standard_normal(shape)) * np.sqrt(model / cell ** 3)))
edges = np.geomspace(0.08, 1.5, 9)
rg = measure(field.astype(np.float32), """
[stats.power]
bins = 8
k_min_mpc = 0.08
k_max_mpc = 1.5
""", cell_mpc=cell)
got = rg["power"]["values"][0, :8]
nm = rg["power"]["n_modes"][:8]
expect = np.array([model[(k >= lo) & (k < hi)].mean() for lo, hi in zip(edges[:-1], edges[1:])])
z = (got / expect - 1) * np.sqrt(nm / 2)
check(np.all(np.abs(z) < 4), f"GRF P(k) = A k^-2 recovered within 4 sigma of cosmic variance: z = {np.round(z, 2)}")
finish()
