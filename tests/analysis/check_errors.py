"""User errors of the analysis verbs: one line on stderr, exit status 2
(DESIGN.md §8), naming the value and what is allowed."""
import os

import h5py
import numpy as np

from support import check, finish, make_catalogue, run, workdir

d = workdir()
cat = os.path.join(d, "cat.h5")
make_catalogue.make(cat, n_fid=40, n_stencil=6, n_train_points=4)


def refused(args, *needles):
    p = run(*args, expect=2)
    err = p.stderr.strip().splitlines()
    last = err[-1] if err else ""
    ok = all(n in last for n in needles)
    check(ok and last.startswith("spinflip: error:"), f"{' '.join(args[:1])} refuses: {last}")


refused(["covariance", cat, "-s", "kernel=powr", "--no-plot"], "unknown kernel 'powr'", "power, scattering")
refused(["fisher", cat, "-s", "scenario=mid", "--no-plot"], "unknown scenario 'mid'", "deep, shallow")
refused(["export", cat, "-s", "freq=500:600"], "matches no coefficient")
refused(["covariance", cat, "-s", "kmean=0.1:1", "--no-plot"], "'kmean'", "k_mean")
refused(["covariance", cat, "-s", "every=0", "--no-plot"], "every=0")
refused(["covariance", cat, "-s", "freq=a:b", "--no-plot"], "not a number")
refused(["covariance", cat, "--transform", "sqrt", "--no-plot"], "sqrt", "none, log, standardise")
refused(["export", cat, "--split", "0.8,-0.1,0.3"], "--split")
refused(["export", cat, "--roles", "train"], "unknown role 'train'")
refused(["covariance", cat, "-s", "name=a;kernel=power", "-s", "name=a", "--no-plot"], "same name 'a'")
# 40 realisations cannot give an inverse for 64 numbers: say how many are needed.
refused(["fisher", cat, "--no-plot", "-o", os.path.join(d, "f.h5")], "64 coefficients", "40 fiducial", "at least 67")

nofid = os.path.join(d, "nofid.h5")
make_catalogue.make(nofid, n_fid=40, no_fiducial=True)
refused(["covariance", nofid, "--no-plot", "-o", os.path.join(d, "x.h5")], "no point with role 'fiducial'")
nost = os.path.join(d, "nostencil.h5")
make_catalogue.make(nost, n_fid=40, no_stencil=True)
refused(["fisher", nost, "-s", "kernel=power", "--no-plot", "-o", os.path.join(d, "x.h5")], "no stencil")
refused(["export", nost, "-s", "kernel=power", "--score", "-o", os.path.join(d, "x.h5")], "no stencil")

pend = os.path.join(d, "pending.h5")
make_catalogue.make(pend, n_fid=40, pending=5, failed=2)
refused(["covariance", pend, "-s", "kernel=power", "--no-plot", "-o", os.path.join(d, "x.h5")],
        "5 of 40 entries", "pending", "--allow-incomplete")
out = os.path.join(d, "ok.h5")
p = run("covariance", pend, "-s", "name=ps;kernel=power", "--allow-incomplete", "--no-plot", "-o", out)
with h5py.File(out) as f:
    check(f["ps"].attrs["n_realisations"] == 33, "--allow-incomplete uses the 33 done entries (5 pending, 2 failed)")
    check(not np.isnan(f["ps/cov"][()]).any(), "no NaN from pending or failed entries")
check("failed" in p.stderr, "failed entries are reported as left out")

# Malformed inputs.
txt = os.path.join(d, "notes.txt")
with open(txt, "w") as fh:
    fh.write("not a catalogue\n")
refused(["covariance", txt, "--no-plot"], "not an HDF5 file")
refused(["covariance", os.path.join(d, "missing.h5"), "--no-plot"], "missing.h5", "cannot open")
bare = os.path.join(d, "bare.h5")
with h5py.File(bare, "w") as f:
    f["x"] = np.arange(3)
refused(["fisher", bare, "--no-plot"], "missing dataset 'design/param_names'")
broken = os.path.join(d, "broken.h5")
make_catalogue.make(broken, n_fid=40)
with h5py.File(broken, "a") as f:
    del f["design/role"]
    f["design/role"] = np.arange(3.0)
refused(["covariance", broken, "--no-plot"], "design/role", "not a string dataset")
with h5py.File(broken, "a") as f:
    del f["design/role"]
    f["design/role"] = np.array(["fiducial"], dtype=h5py.string_dtype())
refused(["covariance", broken, "--no-plot"], "/design/role has 1 rows")
finish()
