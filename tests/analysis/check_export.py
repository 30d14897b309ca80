"""spinflip export: the split never shares a design point between splits, is
deterministic for a seed, the unit cube round-trips, the normalisation comes
from the train split, provenance is copied, and score compression matches
t = ∂μᵀ C⁻¹ (x − μ) evaluated with numpy (Heavens, Jimenez & Lahav 2000)."""
import os

import h5py
import numpy as np

import spinflip_catalogue as sc
from support import check, finish, make_catalogue, model_columns, run, workdir

d = workdir()
cat = os.path.join(d, "cat.h5")
truth = make_catalogue.make(cat, n_fid=200, n_stencil=20, n_train_points=40, n_train_real=4)
a, b, c = (os.path.join(d, x) for x in ("a.h5", "b.h5", "c.h5"))
p = run("export", cat, "-s", "name=ps;kernel=power", "-s", "name=s1;kernel=scattering;order=1", "--seed", "5", "-o", a)
run("export", cat, "-s", "name=ps;kernel=power", "-s", "name=s1;kernel=scattering;order=1", "--seed", "5", "-o", b)
run("export", cat, "-s", "name=ps;kernel=power", "--seed", "6", "--split", "0.5,0.25,0.25", "-o", c)
check("train" in p.stdout, "export prints the split sizes")

A, B, Cx = sc.load_export(a), sc.load_export(b), sc.load_export(c)
for ts, label in ((A, "seed 5"), (Cx, "seed 6")):
    splits_of_point = {}
    for pt, s in zip(ts.point, ts.split):
        splits_of_point.setdefault(int(pt), set()).add(int(s))
    check(all(len(v) == 1 for v in splits_of_point.values()), f"{label}: no design point is in two splits")
    check(set(ts.split) == {0, 1, 2}, f"{label}: train, validation and test all used")
check(np.array_equal(A.split, B.split) and np.array_equal(A.point, B.point), "same seed → identical split")
check(not np.array_equal(A.split, Cx.split), "another seed and fractions → another split")
n_pts = len(set(Cx.point))
per_split = [len(set(Cx.point[Cx.split == k])) for k in range(3)]
check(per_split == [round(0.5 * n_pts), round(0.25 * n_pts), n_pts - round(0.5 * n_pts) - round(0.25 * n_pts)],
      f"--split 0.5,0.25,0.25 cuts the {n_pts} points as {per_split}")
# Only training-role points by default; every done realisation of them.
check(set(np.array(truth["roles"])[A.point]) == {"training"} and len(A.point) == 40 * 4, "default roles: training points, all realisations")

# Unit cube: linear in zeta and E_0, log10 in L_X; from_unit inverts it.
u = A.params_unit
check(np.all((u >= 0) & (u <= 1)), "unit-cube parameters lie in [0, 1]")
check(np.allclose(sc.from_unit(u, A.param_min, A.param_max, A.param_log), A.params, rtol=1e-12),
      "unit cube round-trips to the physical parameters")
lx = (np.log10(A.params[:, 1]) - 38) / 4  # L_X in [1e38, 1e42], log-sampled
check(np.allclose(u[:, 1], lx, rtol=1e-12), "log parameter scaled in log10 space")
check(np.allclose(A.params, truth["points"][A.point]), "physical parameters are the design points'")

with h5py.File(a) as f:
    g = f["ps"]
    cols = model_columns(g, truth)
    X = truth["values"][np.ix_(A.entry, cols)]
    check(np.array_equal(g["data"][()], X), "data vectors are the catalogue's values")
    tr = X[A.split == 0]
    check(np.allclose(g["norm_mean"][()], tr.mean(0)) and np.allclose(g["norm_std"][()], tr.std(0, ddof=1)),
          "normalisation = train-split mean and standard deviation (numpy)")
    check(np.allclose(g["data_normalised"][()], (X - tr.mean(0)) / tr.std(0, ddof=1)), "normalised data")
    prov = dict(f["provenance"].attrs)
    check(prov.get("campaign_sha256") == "0" * 64 and "campaign_text" in prov, "catalogue root attributes copied")
    rec = g["selection"].attrs["record"]
    check("deep/power" in (rec.decode() if isinstance(rec, bytes) else rec), "selection record stored")

# Score compression on the fiducial+stencil model.
s = os.path.join(d, "score.h5")
run("export", cat, "-s", "name=ps;kernel=power", "--score", "-o", s)
with h5py.File(s) as f:
    g = f["ps"]
    cols = model_columns(g, truth)
    fid = np.flatnonzero(truth["entry_point"] == truth["fiducial_point"])
    Xf = truth["values"][np.ix_(fid, cols)]
    n, pdim = Xf.shape
    prec = (n - pdim - 2) / (n - 1) * np.linalg.inv(np.cov(Xf, rowvar=False))
    Aj = truth["A"][cols]
    X = g["data"][()]
    t = (X - Xf.mean(0)) @ prec @ Aj
    check(np.allclose(g["score/t"][()], t, rtol=1e-7, atol=1e-9), "score t = ∂μᵀ C⁻¹ (x − μ) (numpy)")
    F = Aj.T @ prec @ Aj
    theta = np.array([30.0, 40.0, 0.5]) + t @ np.linalg.inv(F)
    check(np.allclose(g["score/theta_mle"][()], theta, rtol=1e-7), "quasi-ML parameters θ_fid + F⁻¹ t")
    # For a linear model the quasi-ML estimate is unbiased: its mean over the
    # exported points tracks φ(θ); the scatter of that mean comes from the
    # entries' noise (1/N) and from the estimated fiducial mean (1/n).
    phi = np.column_stack([A.params[:, 0], np.log10(A.params[:, 1]), A.params[:, 2]])
    resid = g["score/theta_mle"][()] - phi
    sig = np.sqrt(np.diag(np.linalg.inv(F)))
    check(np.all(np.abs(resid.mean(0)) < 4 * sig * np.sqrt(1 / len(resid) + 1 / n)), "quasi-ML estimates unbiased within 4σ")
finish()
