"""spinflip covariance against numpy.cov, the Hartlap et al. (2007) factor and an
independent numpy evaluation of the Ledoit & Wolf (2004) estimator."""
import os

import h5py
import numpy as np

from support import check, finish, make_catalogue, model_columns, run, workdir

d = workdir()
cat = os.path.join(d, "cat.h5")
truth = make_catalogue.make(cat, n_fid=120)
fid_rows = np.flatnonzero(truth["entry_point"] == truth["fiducial_point"])
fid_rows = fid_rows[np.argsort(truth["entry_realisation"][fid_rows])]
out = os.path.join(d, "cov.h5")
p = run("covariance", cat, "-s", "name=ps;kernel=power", "-s", "name=s1;kernel=scattering;order=1;scenario=deep",
        "-s", "name=cad;freq=125:160;every=2", "-o", out)
check("Hartlap factor" in p.stdout and os.path.exists(os.path.join(d, "cov_corr.png")),
      "covariance prints a summary and writes the correlation picture")

with h5py.File(out) as f:
    for name in ("ps", "s1", "cad"):
        g = f[name]
        cols = model_columns(g, truth)
        X = truth["values"][np.ix_(fid_rows, cols)]
        n, pdim = X.shape
        # numpy.cov (rows = realisations → rowvar=False) is the unbiased sample covariance.
        check(np.allclose(g["cov"][()], np.cov(X, rowvar=False), rtol=1e-10, atol=1e-12), f"{name}: cov == numpy.cov")
        check(np.allclose(g["mean"][()], X.mean(0), rtol=1e-12), f"{name}: mean == numpy mean")
        # Correlation: numpy.corrcoef.
        check(np.allclose(g["corr"][()], np.corrcoef(X, rowvar=False), atol=1e-10), f"{name}: corr == numpy.corrcoef")
        # Hartlap, Simon & Schneider (2007), eq. 17: C⁻¹ unbiased = (n − p − 2)/(n − 1) Ĉ⁻¹.
        h = (n - pdim - 2) / (n - 1)
        check(abs(g.attrs["hartlap_factor"] - h) < 1e-14, f"{name}: Hartlap factor (n-p-2)/(n-1) = {h:.6f}")
        check(np.allclose(g["precision"][()], h * np.linalg.inv(np.cov(X, rowvar=False)), rtol=1e-8),
              f"{name}: precision == Hartlap x numpy.linalg.inv(cov)")
        # Condition number: numpy.linalg.cond (2-norm) of an SPD matrix is λmax/λmin.
        check(abs(g.attrs["condition_number"] / np.linalg.cond(g["cov"][()]) - 1) < 1e-8,
              f"{name}: condition number == numpy.linalg.cond")
    # The cadence selection: frequencies 125..160 MHz, every second unit of those in range.
    s = f["cad/selection"]
    freqs = s["unit_freq_MHz"][()]
    check(freqs.min() >= 125 and freqs.max() <= 160, "freq=125:160 keeps units in range only")
    for sc in ("deep/power", "deep/scattering"):
        sk = np.array([f"{a.decode()}/{b.decode()}" for a, b in zip(s["scenario"][()], s["kernel"][()])])
        units = sorted(set(s["unit"][()][sk == sc]))
        g_all = h5py.File(cat)["stats/" + sc]["unit_freq_MHz"][()]
        in_range = [u for u, fr in enumerate(g_all) if 125 <= fr <= 160]
        check(units == in_range[::2], f"every=2 on {sc}: units {units} == {in_range[::2]}")
    check(set(f["s1/selection/coeff"][()]) == {1, 2, 3}, "order=1 keeps the S1 coefficients only")
    # The scattering order-0 term is exactly 0 in every entry: dropped and recorded.
    rec = f["cad/selection"].attrs["record"]
    rec = rec.decode() if isinstance(rec, bytes) else rec
    sc_coeff = f["cad/selection/coeff"][()][f["cad/selection/kernel"][()] == b"scattering"]
    check("constant coefficients" in rec and 0 not in set(sc_coeff), "constant S0 columns dropped and noted in the record")

# Ledoit & Wolf (2004), J. Multivariate Anal. 88, 365, section 3 (formulas from
# memory of the paper; lemma numbers not relied on), evaluated here directly with numpy (sample covariance S with 1/n, m = <S, I>,
# d² = ‖S − mI‖², b̄² = n⁻² Σ‖x xᵀ − S‖², b² = min(b̄², d²), S* = (b²/d²) m I + (1 − b²/d²) S,
# with ‖A‖² = tr(AAᵀ)/p).
out2 = os.path.join(d, "lw.h5")
run("covariance", cat, "-s", "name=ps;kernel=power", "--shrink", "--no-plot", "-o", out2)
with h5py.File(out2) as f:
    g = f["ps"]
    X = truth["values"][np.ix_(fid_rows, model_columns(g, truth))]
    n, pdim = X.shape
    Y = X - X.mean(0)
    S = Y.T @ Y / n
    norm2 = lambda M: np.trace(M @ M.T) / pdim  # noqa: E731
    m = np.trace(S) / pdim
    d2 = norm2(S - m * np.eye(pdim))
    b2 = min(sum(norm2(np.outer(y, y) - S) for y in Y) / n**2, d2)
    shrunk = (b2 / d2) * m * np.eye(pdim) + (1 - b2 / d2) * S
    check(abs(g.attrs["shrinkage_intensity"] - b2 / d2) < 1e-10, f"Ledoit-Wolf intensity {b2 / d2:.6f}")
    check(np.allclose(g["cov"][()], shrunk, rtol=1e-10), "Ledoit-Wolf shrunk covariance == direct numpy evaluation")
    check(g.attrs["hartlap_applied"] == 0, "no Hartlap factor on a shrunk covariance")

# reduce=rotation on a per-orientation kernel, against the definition in
# DESIGN.md §6 evaluated with numpy: S1(j) = mean_l S1(j,l) and
# S2(j1,j2,δ) = mean_l1 S2(j1,l1,j2,(l1+δ) mod L).
rot = os.path.join(d, "rot.h5")
truth_r = make_catalogue.make(rot, n_fid=120, per_orientation=True)
out_r = os.path.join(d, "rot_cov.h5")
run("covariance", rot, "-s", "name=r;kernel=scattering;scenario=deep;reduce=rotation;unit=1", "--no-plot", "-o", out_r)
ax = truth_r["scat_axes"]
L = len(set(ax["l1"][ax["order"] == 1]))
fr = np.flatnonzero(truth_r["entry_point"] == truth_r["fiducial_point"])
fr = fr[np.argsort(truth_r["entry_realisation"][fr])]
cols = [truth_r["index"][("deep", "scattering", 1, c)] for c in range(len(ax["order"]))]
V = truth_r["values"][np.ix_(fr, cols)]
ref = []
for j in sorted(set(ax["j1"][ax["order"] == 1])):
    ref.append(V[:, (ax["order"] == 1) & (ax["j1"] == j)].mean(1))
s2 = ax["order"] == 2
for j1, j2 in sorted(set(zip(ax["j1"][s2], ax["j2"][s2]))):
    for delta in range(L):
        m = s2 & (ax["j1"] == j1) & (ax["j2"] == j2) & (((ax["l2"] - ax["l1"]) % L) == delta)
        ref.append(V[:, m].mean(1))
ref = np.array(ref).T
with h5py.File(out_r) as f:
    check(f["r/mean"].shape[0] == ref.shape[1] and np.allclose(f["r/mean"][()], ref.mean(0), rtol=1e-12),
          f"reduce=rotation: {ref.shape[1]} rotation means == numpy from the definition")
    check(np.allclose(f["r/cov"][()], np.cov(ref, rowvar=False), rtol=1e-9), "reduce=rotation covariance == numpy.cov")
    check(set(f["r/selection/n_averaged"][()]) == {L}, f"every reduced coefficient averages {L} orientations")
run("covariance", cat, "-s", "kernel=power;reduce=rotation", "--no-plot", "-o", out_r, expect=2)

# Transforms: log → numpy.cov of log(x); standardise → the correlation matrix.
for tr in ("log", "standardise"):
    o = os.path.join(d, f"{tr}.h5")
    run("covariance", cat, "-s", "name=ps;kernel=power", "--transform", tr, "--no-plot", "-o", o)
    with h5py.File(o) as f:
        X = truth["values"][np.ix_(fid_rows, model_columns(f["ps"], truth))]
        ref = np.cov(np.log(X), rowvar=False) if tr == "log" else np.corrcoef(X, rowvar=False)
        check(np.allclose(f["ps/cov"][()], ref, rtol=1e-9, atol=1e-12), f"--transform {tr} matches numpy")
finish()
