"""spinflip plot on a synthetic catalogue (make_catalogue.py): the numbers it
draws (kept with --data) are the catalogue's values read with h5py, panel by
panel; PNG and PDF come out with their format signatures (PNG: ISO/IEC 15948;
PDF: ISO 32000, "%PDF-"); nothing half-written is left beside them; user errors
exit with status 2 and one line."""
import glob
import os

import h5py
import numpy as np

import make_catalogue
from support import check, finish, run, text, workdir

d = workdir()
cat = os.path.join(d, "cat.h5")
truth = make_catalogue.make(cat, n_fid=8, n_stencil=2, n_train_points=5, n_train_real=1)
with h5py.File(cat) as f:
    vals = f["stats/deep/power/values"][()]
    uz = f["stats/deep/power/unit_z"][()]
    s_vals = f["stats/shallow/power/values"][()]
roles = np.asarray(truth["roles"])[truth["entry_point"]]
train = np.flatnonzero((roles == "training") & (truth["status"] == 1))
fid = np.flatnonzero((roles == "fiducial") & (truth["status"] == 1))

# Against redshift, design points coloured by E_0: one panel per k bin, both scenarios in each.
png, data = os.path.join(d, "z.png"), os.path.join(d, "z.h5")
p = run("plot", cat, "-s", "kernel=power", "--by", "E_0", "-o", png, "--data", data)
with h5py.File(data) as f:
    panel, x, ent = f["element_panel"][()], f["element_x"][()], f["entries"][()]
    series = [text(s) for s in f["element_series"][()]]
    unit, coeff, v = f["element_unit"][()], f["element_coeff"][()], f["values"][()]
    colour = f["colour"][()]
    titles = [text(s) for s in f["panel_title"][()]]
check(np.array_equal(ent, train), "design mode draws the done training entries")
check(len(titles) == make_catalogue.N_POWER_K and "4 panels" in p.stdout, f"one panel per k bin: {titles}")
check(set(series) == {"deep", "shallow"}, "both scenarios overlaid")
deep = [i for i, s in enumerate(series) if s == "deep"]
check(np.array_equal(v[:, deep], vals[train][:, unit[deep], coeff[deep]]), "drawn values == h5py catalogue values")
check(np.allclose(x[deep], uz[unit[deep]]), "x = the unit's redshift")
check(np.allclose(colour, truth["points"][truth["entry_point"][train], 2]), "colour = E_0 of each entry")
check(all(len(set(panel[[i for i in range(len(panel)) if coeff[i] == c]])) == 1 for c in set(coeff)),
      "one coefficient stays in one panel across units and scenarios")
with open(png, "rb") as fh:
    check(fh.read(8) == b"\x89PNG\r\n\x1a\n", "PNG signature")

# Fiducial mean ± 1σ against k at one redshift, as PDF.
pdf, data = os.path.join(d, "k.pdf"), os.path.join(d, "k.h5")
run("plot", cat, "-s", "kernel=power;scenario=shallow", "--fiducial", "--against", "coefficient", "--at-z", "9",
    "-o", pdf, "--data", data)
with h5py.File(data) as f:
    unit, x, ent, v = f["element_unit"][()], f["element_x"][()], f["entries"][()], f["values"][()]
nearest = int(np.argmin(np.abs(uz - 9)))
check(np.array_equal(np.sort(ent), fid) and (unit == nearest).all(), f"fiducial realisations at the unit nearest z = 9")
check(np.array_equal(v, s_vals[ent][:, nearest, :]), "drawn values == h5py (fiducial, one unit)")
check(np.allclose(x, np.sqrt(np.geomspace(0.05, 2.0, 5)[:-1] * np.geomspace(0.05, 2.0, 5)[1:])), "x = k_mean")
with open(pdf, "rb") as fh:
    check(fh.read(5) == b"%PDF-", "PDF signature")
check(not glob.glob(os.path.join(d, "*.partial")) and not glob.glob(os.path.join(d, "*plotdata*")),
      "no partial or scratch files left")

# Scattering S1 against j, and user errors.
run("plot", cat, "-s", "kernel=scattering;order=1", "--against", "coefficient", "-o", os.path.join(d, "s1.png"))
for args, what in [(["--by", "nope"], "--by nope"), (["--format", "gif"], "--format gif"),
                   (["--against", "k"], "--against k"), (["-s", "kernel=power", "-s", "kernel=scattering"], "one --select"),
                   (["--role", "nonsense"], "--role")]:
    p = run("plot", cat, *args, "-o", os.path.join(d, "bad.png"), expect=2)
    err = p.stderr.strip().splitlines()
    check(len(err) == 1 and what.split()[0] in err[0] or what in err[0], f"{what}: one-line error: {err}")
check(not os.path.exists(os.path.join(d, "bad.png")), "no picture from a refused command")
# Per-orientation scattering has 25 coefficients: more panels than fit, refused with a hint.
cat2 = os.path.join(d, "orient.h5")
make_catalogue.make(cat2, n_fid=4, n_stencil=2, n_train_points=3, n_train_real=1, per_orientation=True)
p = run("plot", cat2, "-s", "kernel=scattering", "-o", os.path.join(d, "bad.png"), expect=2)
check("25 panels" in p.stderr and "at most 16" in p.stderr, f"too many panels refused: {p.stderr.strip()}")
run("plot", cat2, "-s", "kernel=scattering;order=2;reduce=rotation", "--fiducial", "-o", os.path.join(d, "s2.png"))
finish()
