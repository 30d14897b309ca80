"""End to end on a real catalogue: `spinflip run` on jobs/tiny (2 ranks), then
covariance, fisher and export on it; the outputs are compared with the
catalogue read directly with h5py/numpy."""
import os
import subprocess

import h5py
import numpy as np

import spinflip_catalogue as sc
from support import SPINFLIP, check, finish, run, workdir

d = workdir()
cat = os.path.join(d, "tiny.h5")
campaign = os.path.join(os.environ["SPINFLIP_SOURCE_DIR"], "jobs", "tiny", "campaign.toml")
mpiexec = os.environ.get("MPIEXEC", "mpiexec")
p = subprocess.run([mpiexec, "-n", "2", "--oversubscribe", SPINFLIP, "run", campaign, "-o", cat],
                   capture_output=True, text=True)
if p.returncode != 0:
    raise SystemExit(f"spinflip run failed ({p.returncode}):\n{p.stdout}\n{p.stderr}")

with sc.open_catalogue(cat) as c:
    fid = c.entries_with_role("fiducial")
    n_fid = len(fid)
    kernels = c.kernels()
check(("clean", "power") in kernels and n_fid >= 2, f"tiny catalogue: {kernels}, {n_fid} fiducial realisations")

cov = os.path.join(d, "cov.h5")
run("covariance", cat, "-s", "name=P;kernel=power;scenario=clean;unit=1;quantity=0", "--shrink", "--no-plot", "-o", cov)
with h5py.File(cov) as f, h5py.File(cat) as g:
    s = f["P/selection"]
    vals = g["stats/clean/power/values"][()][np.sort(fid)]
    X = vals[:, s["unit"][()], s["coeff"][()]]
    keep = X.std(0) > 0
    check(np.allclose(f["P/mean"][()], X[:, keep].mean(0), rtol=1e-12), "covariance mean == h5py/numpy on the catalogue")

fis = os.path.join(d, "fisher.h5")
p = run("fisher", cat, "-s", "name=P;kernel=power;scenario=clean;unit=1;quantity=0",
        "-s", "name=S1;kernel=scattering;scenario=clean;order=1;unit=4", "--shrink", "-o", fis)
print(p.stdout)
fr = sc.load_fisher(fis)
check(all(np.isfinite(fr["selections"][k]["sigma_marginal"]).all() for k in ("P", "S1")), "finite Fisher errors")
check(all(n in p.stdout for n in fr["param_names"]), "table names every parameter")

exp = os.path.join(d, "train.h5")
run("export", cat, "-s", "name=P;kernel=power;quantity=0", "-o", exp)
ts = sc.load_export(exp)
with h5py.File(cat) as g:
    camp = g.attrs["campaign_sha256"]
check(ts.provenance["campaign_sha256"] == (camp.decode() if isinstance(camp, bytes) else camp),
      "export carries the catalogue's campaign hash")
with h5py.File(cat) as g:
    role = np.array([r.decode().rstrip("\x00 ") if isinstance(r, bytes) else r for r in g["design/role"][()]])
    ep, es = g["entries/point"][()], g["entries/status"][()]
    n_train = int(((role[ep] == "training") | (role[ep] == "list"))[es == 1].sum())
check(len(ts.point) == n_train, f"export holds the {n_train} done training entries (h5py count)")
finish()
