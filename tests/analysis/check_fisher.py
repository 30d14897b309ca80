"""spinflip fisher on a linear Gaussian model μ(θ) = μ0 + A (φ − φ_fid), noise
covariance C: the analytic Fisher matrix is AᵀC⁻¹A (e.g. Tegmark, Taylor &
Heavens 1997, eq. 15, for parameter-independent C)."""
import os

import h5py
import numpy as np

from support import check, finish, make_catalogue, model_columns, run, workdir

d = workdir()
cat = os.path.join(d, "cat.h5")
truth = make_catalogue.make(cat, n_fid=400, n_stencil=30)
fid_rows = np.flatnonzero(truth["entry_point"] == truth["fiducial_point"])
fid_rows = fid_rows[np.argsort(truth["entry_realisation"][fid_rows])]
out = os.path.join(d, "fisher.h5")
p = run("fisher", cat, "-s", "name=ps;kernel=power", "-s", "name=scat;kernel=scattering", "-s", "name=both",
        "-o", out)
print(p.stdout)
check(all(s in p.stdout for s in ("ps", "scat", "both", "zeta", "log10(L_X)", "E_0")),
      "comparison table names every selection and parameter")
check(os.path.exists(os.path.join(d, "fisher_corner.png")), "corner picture written")

with h5py.File(out) as f:
    for name in ("ps", "scat", "both"):
        g = f[name]
        cols = model_columns(g, truth)
        A = truth["A"][cols]
        C = truth["C"][np.ix_(cols, cols)]
        # Realisation-matched central differences of a linear mean are exact
        # (the noise cancels; float rounding only).
        check(np.allclose(g["derivatives"][()], A, rtol=1e-7, atol=1e-9), f"{name}: derivatives == A")
        X = truth["values"][np.ix_(fid_rows, cols)]
        n, pdim = X.shape
        h = (n - pdim - 2) / (n - 1)  # Hartlap, Simon & Schneider (2007) eq. 17
        F_np = h * A.T @ np.linalg.solve(np.cov(X, rowvar=False), A)
        check(np.allclose(g["fisher"][()], F_np, rtol=1e-8), f"{name}: F == Hartlap x Aᵀ numpy.cov⁻¹ A")
        F_true = A.T @ np.linalg.solve(C, A)
        sig_true = np.sqrt(np.diag(np.linalg.inv(F_true)))
        sig = g["sigma_marginal"][()]
        # Sampling scatter: with n realisations the Hartlap-corrected Fisher
        # fluctuates by ~ sqrt(2/(n − p)) relative (Taylor, Joachimi & Kitching
        # 2013, from memory); allow 4 of those on each 1σ error (which moves by half as much).
        tol = 4 * 0.5 * np.sqrt(2.0 / (n - pdim))
        check(np.all(np.abs(sig / sig_true - 1) < tol),
              f"{name}: marginal sigma {np.round(sig, 4)} vs analytic {np.round(sig_true, 4)} within {tol:.3f}")
        check(np.allclose(g["sigma_conditional"][()], 1 / np.sqrt(np.diag(g["fisher"][()])), rtol=1e-12),
              f"{name}: conditional sigma = 1/sqrt(F_ii)")
        check(np.allclose(g["fisher_inverse"][()], np.linalg.inv(g["fisher"][()]), rtol=1e-8),
              f"{name}: fisher_inverse == numpy.linalg.inv(F)")
        conv = g["convergence"]
        labels = [x.decode() for x in conv["labels"][()]]
        check(any("half covariance" in x for x in labels) and any("half derivative" in x for x in labels)
              and any("step index 1" in x for x in labels), f"{name}: convergence checks run ({labels})")
        # Exact derivatives: half the derivative realisations and the other step
        # size give the same derivative of a linear model, so those ratios are 1.
        r = conv["ratio"][()]
        for k, lab in enumerate(labels):
            if "half derivative" in lab or "step index" in lab:
                check(np.allclose(r[k], 1, atol=1e-6), f"{name}: '{lab}' ratio 1 for a linear model")

# Fisher information is invariant under an invertible linear map of the data
# (common practice), so --transform standardise must not change F.
out_s = os.path.join(d, "fisher_std.h5")
run("fisher", cat, "-s", "name=ps;kernel=power", "--transform", "standardise", "--no-plot", "-o", out_s)
with h5py.File(out) as f, h5py.File(out_s) as g:
    check(np.allclose(f["ps/fisher"][()], g["ps/fisher"][()], rtol=1e-8), "Fisher invariant under standardisation")

# The known-C path: with the true C supplied, F is exactly AᵀC⁻¹A (Tegmark,
# Taylor & Heavens 1997 eq. 15; rounding only), since the derivatives are exact.
known = os.path.join(d, "known_cov.h5")
with h5py.File(out) as f:
    cols = model_columns(f["ps"], truth)
with h5py.File(known, "w") as k:
    k["cov"] = truth["C"][np.ix_(cols, cols)]
out_k = os.path.join(d, "fisher_known.h5")
run("fisher", cat, "-s", "name=ps;kernel=power", "--covariance", known, "--no-plot", "-o", out_k)
with h5py.File(out_k) as f:
    A = truth["A"][cols]
    F_true = A.T @ np.linalg.solve(truth["C"][np.ix_(cols, cols)], A)
    check(np.allclose(f["ps/fisher"][()], F_true, rtol=1e-9), "--covariance with the true C: F == AᵀC⁻¹A exactly")
# A `spinflip covariance` output as --covariance reproduces the sample-covariance Fisher.
cov = os.path.join(d, "cov.h5")
run("covariance", cat, "-s", "name=ps;kernel=power", "--no-plot", "-o", cov)
out_c = os.path.join(d, "fisher_cov.h5")
run("fisher", cat, "-s", "name=ps;kernel=power", "--covariance", cov, "--no-plot", "-o", out_c)
with h5py.File(out) as f, h5py.File(out_c) as g:
    check(np.allclose(f["ps/fisher"][()], g["ps/fisher"][()], rtol=1e-10), "--covariance cov.h5 == built-in covariance")
p = run("fisher", cat, "-s", "name=ps;kernel=power;unit=0", "--covariance", cov, "--no-plot", "-o", out_c, expect=2)
check("needs 8 x 8" in p.stderr, "a covariance of another selection is refused")

# Noisy derivatives (stencil noise not matched): Coulton & Wandelt (2023) show
# the standard estimator overestimates the information (σ too small) and the
# compressed one underestimates it; the combined one lies between.
noisy = os.path.join(d, "noisy.h5")
truth_n = make_catalogue.make(noisy, n_fid=400, n_stencil=40, unmatched=True, seed=11)
out_n = os.path.join(d, "fisher_noisy.h5")
p = run("fisher", noisy, "-s", "name=ps;kernel=power", "--combined", "--no-plot", "--tolerance", "0.05", "-o", out_n)
with h5py.File(out_n) as f:
    g = f["ps"]
    s_std = g["sigma_marginal"][()]
    s_cmp = g["combined/sigma_compressed"][()]
    s_comb = g["combined/sigma_marginal"][()]
    check(np.all(s_std < s_cmp), f"standard sigma {np.round(s_std, 4)} < compressed {np.round(s_cmp, 4)}")
    check(np.all((s_comb > s_std) & (s_comb < s_cmp)), "combined sigma lies between standard and compressed")
    check(g["convergence/flagged"][()].any() and "convergence flag" in p.stdout,
          "noisy derivatives are flagged by the convergence checks")
finish()
