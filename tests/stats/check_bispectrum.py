"""Bispectrum of `spinflip measure` against a direct numpy estimator (an explicit
sum over closed mode triplets, the quantity the FFT shell estimator of
Scoccimarro 2015 / Watkinson et al. 2017 computes), zero mean for Gaussian
fields, and the exact reduced bispectrum of a white local-type field."""
import numpy as np

from common import check, close, finish, measure

rng = np.random.default_rng(11)


def direct(x, cell, k1, k2, angle_deg, frac):
    """Σ over a in S1, b in S2 with c = -(a+b) (mod N) in S3 of δ̃a δ̃b δ̃c, / N_tri / V; and B/(P1P2+P2P3+P3P1)."""
    x = x.astype(np.float64)
    dv = cell ** x.ndim
    n = x.size
    dt = dv * np.fft.fftn(x)
    idx = np.array(np.meshgrid(*[np.arange(s) for s in x.shape], indexing="ij")).reshape(x.ndim, -1)
    kvec = np.array([2 * np.pi * np.fft.fftfreq(s, d=cell)[i] for s, i in zip(x.shape, idx)])
    kmag = np.sqrt((kvec ** 2).sum(0))
    k3 = np.sqrt(k1 ** 2 + k2 ** 2 + 2 * k1 * k2 * np.cos(np.radians(angle_deg)))
    shells = [(kmag > 0) & (np.abs(kmag - k) < 0.5 * frac * k) for k in (k1, k2, k3)]
    a_idx, b_idx = idx[:, shells[0]], idx[:, shells[1]]
    shape = np.array(x.shape)[:, None, None]
    c_idx = (-(a_idx[:, :, None] + b_idx[:, None, :])) % shape  # every pair (a, b)
    flat_c = np.ravel_multi_index(tuple(c_idx), x.shape)
    in3 = shells[2][flat_c]
    flat_a = np.ravel_multi_index(tuple(a_idx), x.shape)[:, None]
    flat_b = np.ravel_multi_index(tuple(b_idx), x.shape)[None, :]
    d = dt.ravel()
    prod = (d[flat_a] * d[flat_b] * d[flat_c])[in3]
    ntri = in3.sum()
    B = np.real(prod.sum()) / ntri / (n * dv)
    P = [np.mean(np.abs(d[s]) ** 2) / (n * dv) for s in shells]
    return B, B / (P[0] * P[1] + P[1] * P[2] + P[2] * P[0]), ntri


def local_field(shape, f):
    g = rng.standard_normal(shape)
    return (g + f * (g ** 2 - 1.0)).astype(np.float32)


tri = dict(k1=[0.8, 1.2, 0.9], k2=[0.8, 0.6, 1.1], ang=[120.0, 60.0, 150.0])
toml = lambda table, frac=0.2: f"""[stats.{table}]
k1_mpc = {tri['k1']}
k2_mpc = {tri['k2']}
angle_deg = {tri['ang']}
shell_fraction = {frac}
"""

# --- 2D slice (non-square) against the direct triplet sum, relative 1e-4
img = local_field((40, 48), 0.3)
res = measure(img, toml("slice_bispectrum"), cell_mpc=1.0)["slice_bispectrum"]
ref = [direct(img, 1.0, a, b, t, 0.2) for a, b, t in zip(tri["k1"], tri["k2"], tri["ang"])]
close(res["values"][0, :3], [r[0] for r in ref], what="2D B vs direct numpy triplet sum")
close(res["values"][0, 3:], [r[1] for r in ref], what="2D B/(P1P2+P2P3+P3P1) vs direct numpy")
check(list(res["n_triangles"][:3]) == [r[2] for r in ref], f"N_tri equals the direct count {[r[2] for r in ref]}")
check(list(res["quantity"]) == [0, 0, 0, 1, 1, 1], "quantity axis: B first, then normalised")

# --- 3D chunk (non-cubic, cell 2 Mpc) against the direct sum
cube = local_field((12, 14, 16), 0.3)
t3 = "[stats.bispectrum]\nk1_mpc = [0.9]\nk2_mpc = [0.7]\nangle_deg = [100.0]\nshell_fraction = 0.3\n"
res3 = measure(cube, t3, cell_mpc=2.0)["bispectrum"]
b3, q3, n3 = direct(cube, 2.0, 0.9, 0.7, 100.0, 0.3)
close(res3["values"][0], [b3, q3], what="3D B and normalised B vs direct numpy triplet sum")

# Sampling checks use 16 slices of 128² with wide shells (shell_fraction 0.5) so the
# triangle counts are large enough to detect the signal.
R = 16
wide = lambda table: toml(table, 0.5)

# --- Gaussian white field: B consistent with zero (mean over slices within 4 standard errors)
gauss = rng.standard_normal((128, 128, R)).astype(np.float32)
rg = measure(gauss, wide("slice_bispectrum"))["slice_bispectrum"]["values"][:, :3]
z = rg.mean(0) / (rg.std(0, ddof=1) / np.sqrt(R))
check(np.all(np.abs(z) < 4), f"Gaussian field: mean B / standard error = {np.round(z, 2)} (|z| < 4)")

# --- white local-type field δ = g + f(g² − 1), g iid N(0, 1): for iid cells B̂ is unbiased for the flat
# B = ΔV² κ3 with κ3 = E[δ³] = 6f + 8f³ (Gaussian moments E g⁴ = 3, E g⁶ = 15: common practice),
# and P = ΔV σ², σ² = 1 + 2f². The tree-level local-type result B = 2f(P1P2+P2P3+P3P1)
# (e.g. Komatsu & Spergel 2001, from memory) is its small-f limit.
f = 0.3
ng = local_field((128, 128, R), f)
rn = measure(ng, wide("slice_bispectrum"))["slice_bispectrum"]["values"]
kappa3 = 6 * f + 8 * f ** 3
z = (rn[:, :3].mean(0) - kappa3) / (rn[:, :3].std(0, ddof=1) / np.sqrt(R))
check(np.all(np.abs(z) < 4), f"local field f={f}: B = {np.round(rn[:, :3].mean(0), 3)} vs kappa3 = {kappa3:.3f}, z = {np.round(z, 2)}")
# The per-slice ratio B/(ΣPP) is biased by the B–P correlation of a non-Gaussian field, so it is
# only held to 15% of the exact value κ3 / (3σ⁴).
q_exact = kappa3 / (3 * (1 + 2 * f ** 2) ** 2)
q = rn[:, 3:].mean(0)
check(np.all(np.abs(q / q_exact - 1) < 0.15), f"normalised B = {np.round(q, 3)} within 15% of {q_exact:.3f}")
finish()
