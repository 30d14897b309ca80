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

# Without any --select or --shrink: the campaign's [analysis] select defaults (jobs/tiny).
cov_d, fis_d = os.path.join(d, "cov_default.h5"), os.path.join(d, "fisher_default.h5")
p = run("covariance", cat, "--no-plot", "-o", cov_d)
cv = sc.load_covariance(cov_d)
check(sorted(cv) == ["S1_clean", "delta2_noisy"] and all(np.isfinite(v["precision"]).all() for v in cv.values()),
      f"covariance with no flags: the campaign's selections, inverted ({sorted(cv)})")
p = run("fisher", cat, "--no-plot", "-o", fis_d)
fd = sc.load_fisher(fis_d)
check(all(np.isfinite(fd["selections"][k]["sigma_marginal"]).all() for k in ("S1_clean", "delta2_noisy")),
      "fisher with no flags: finite errors for the campaign's selections")
check(fd.get("param_labels") == ["ζ", "T_vir,min [K]"], f"fisher output carries the campaign's labels {fd.get('param_labels')}")

# spinflip plot with its defaults (Δ² against z across the training points) and the fiducial band.
png = os.path.join(d, "d2.png")
run("plot", cat, "-o", png)
run("plot", cat, "--fiducial", "-s", "kernel=scattering;order=1", "-o", os.path.join(d, "s1.pdf"))
with open(png, "rb") as fh:
    check(fh.read(8) == b"\x89PNG\r\n\x1a\n", "plot wrote a PNG (ISO/IEC 15948 signature)")

# The catalogue describes itself (written by 2 ranks with parallel HDF5), and the Python
# reader's select() gives what h5py reads.
with h5py.File(cat) as g:
    bare = []
    g.visititems(lambda n, o: bare.append(n) if isinstance(o, h5py.Dataset) and "units" not in o.attrs else None)
    check(not bare, f"every dataset has units ({bare[:4]})")
    v = g["stats/noisy/power/values"]
    check({"quantity", "k_lo", "k_hi", "k_mean", "n_modes"} <= set(v.dims[2].keys()), f"power axes are dimension scales ({sorted(v.dims[2].keys())})")
    mq = g["stats/clean/moments/quantity"][()]
    check(len(g["stats/clean/moments"].attrs["quantity_names"]) == len(set(mq.tolist())),
          "one moments quantity name per quantity present")
    uz = g["stats/noisy/power/unit_z"][()]
    ref = g["stats/noisy/power/values"][()]
    role = np.array([r.decode().rstrip("\x00 ") if isinstance(r, bytes) else r for r in g["design/role"][()]])
    tr = np.flatnonzero((role[g["entries/point"][()]] == "training") & (g["entries/status"][()] == 1))
    q = g["stats/noisy/power/quantity"][()]
with sc.open_catalogue(cat) as c:
    s = c.select("noisy", "power", role="training", z=8.5, quantity="delta2", as_xarray=False)
u = int(np.argmin(np.abs(uz - 8.5)))
check(np.array_equal(s.values, ref[tr][:, u, q == 1], equal_nan=True), "select(noisy, power, training, z=8.5, delta2) == h5py")

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
