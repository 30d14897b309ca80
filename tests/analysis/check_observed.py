"""Observed modes in the analysis verbs (DESIGN.md §5; docs/analysis.md,
"NaN coefficients" and "Conditioning"): a coefficient NaN in every realisation
(a bin the instrument emptied) is left out with a one-line note naming it, and
a covariance that cannot be inverted is refused with exit status 2 and the ways
out, instead of a forecast. Synthetic catalogue of a linear Gaussian model
(make_catalogue.py); the expected covariance is numpy's (np.cov)."""
import os

import h5py
import numpy as np

from support import check, finish, make_catalogue, run, workdir

d = workdir()
cat = os.path.join(d, "cat.h5")
make_catalogue.make(cat, n_fid=60, n_stencil=8, n_train_points=4)
with h5py.File(cat, "r+") as f:
    v = f["stats/deep/power/values"]
    x = v[()]
    x[:, 0, 0] = np.nan  # unit 0, bin 0: no kept mode in any entry
    v[...] = x

# 1. The all-NaN coefficient is dropped and named; the rest equals numpy's covariance.
out = os.path.join(d, "cov.h5")
p = run("covariance", cat, "-s", "name=p;kernel=power;scenario=deep", "--no-plot", "-o", out)
notes = [l for l in p.stderr.splitlines() if "NaN coefficients" in l]
check(len(notes) == 1 and "deep/power u0" in notes[0], f"one note names the NaN coefficient: {notes}")
with h5py.File(cat) as f, h5py.File(out) as o:
    rec = o["p/selection"].attrs["record"]
    rec = rec.decode() if isinstance(rec, bytes) else rec
    check("NaN coefficients" in rec, "the note is kept in the selection record")
    sel_u, sel_c = o["p/selection/unit"][()], o["p/selection/coeff"][()]
    check(not ((sel_u == 0) & (sel_c == 0)).any(), "unit 0 bin 0 is not in the data vector")
    ent = o["p/entries"][()]
    vals = f["stats/deep/power/values"][()][ent][:, sel_u, sel_c]
    ref = np.cov(vals, rowvar=False)  # numpy reference, ddof = 1 as the sample covariance
    check(np.allclose(o["p/cov"][()], ref, rtol=1e-10, atol=0), "covariance of the rest equals numpy's")
    check(np.isfinite(o["p/cov"][()]).all(), "no NaN reaches the covariance")

# 2. An exact linear combination makes the covariance singular: refused, exit 2, with the hint.
dup = os.path.join(d, "dup.h5")
make_catalogue.make(dup, n_fid=60, n_stencil=8, n_train_points=4)
with h5py.File(dup, "r+") as f:
    v = f["stats/deep/power/values"]
    x = v[()]
    x[:, 1, 2] = 2.0 * x[:, 1, 1] - 0.5 * x[:, 1, 3]
    v[...] = x
for verb in ("covariance", "fisher"):
    p = run(verb, dup, "-s", "name=p;kernel=power;scenario=deep", "--no-plot", "-o", os.path.join(d, verb + ".h5"),
            expect=2)
    last = p.stderr.strip().splitlines()[-1]
    check(last.startswith("spinflip: error:") and "condition number" in last and "--shrink" in last
          and "fewer coefficients" in last and "more fiducial realisations" in last and "deep/power u1" in last,
          f"{verb} refuses a singular covariance, naming the coefficients and the ways out: {last}")
    check(not os.path.exists(os.path.join(d, verb + ".h5")) and not os.path.exists(os.path.join(d, verb + ".h5.partial")),
          f"{verb}: no output (not even a partial one) is left")
    check("inf" not in p.stdout, f"{verb} prints no inf")
# --shrink is a way out that works (Ledoit & Wolf 2004 makes the estimate positive definite).
p = run("covariance", dup, "-s", "name=p;kernel=power;scenario=deep", "--shrink", "--no-plot",
        "-o", os.path.join(d, "shrunk.h5"))
check("Hartlap factor" in p.stdout and "-0." not in p.stdout, "--shrink passes and prints no negative Hartlap factor")

# 3. More coefficients than realisations: the real cause is named (not "P and delta2").
few = os.path.join(d, "few.h5")
make_catalogue.make(few, n_fid=20, n_stencil=8, n_train_points=4)
p = run("covariance", few, "-s", "name=p;kernel=power", "--no-plot", "-o", os.path.join(d, "t.h5"), expect=2)
last = p.stderr.strip().splitlines()[-1]
check("24 coefficients from 20 realisations" in last and "delta2" not in last, f"the cause is the sample size: {last}")

# 4. A bin holding rounding residue (the symptom of averaging removed modes as zeros): its
# correlations look harmless, its spread is 1e-12 of its neighbours'. Refused, named.
res = os.path.join(d, "residue.h5")
make_catalogue.make(res, n_fid=60, n_stencil=8, n_train_points=4)
with h5py.File(res, "r+") as f:
    v = f["stats/deep/power/values"]
    x = v[()]
    x[:, 2, 0] = 2.3e-9 * (1 + 0.05 * np.random.default_rng(2).normal(size=x.shape[0]))
    v[...] = x
p = run("fisher", res, "-s", "name=p;kernel=power;scenario=deep", "--no-plot", "-o", os.path.join(d, "r.h5"), expect=2)
last = p.stderr.strip().splitlines()[-1]
check("deep/power u2" in last and "zero variance" in last, f"the vanishing coefficient is named and refused: {last}")
finish()
