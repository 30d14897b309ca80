"""`spinflip measure` input handling: .npy in C and Fortran order, float32 and
float64, both byte orders (numpy writes them; numpy's .npy format is the
reference), an HDF5 dataset written by h5py, and every user error exiting with
status 2 and a single-line message naming the problem."""
import os
import subprocess

import h5py
import numpy as np

from common import SPINFLIP, check, close, finish, workdir

rng = np.random.default_rng(2)
d = workdir()
STATS = """[stats.slice_power]
bins = 4
k_min_mpc = 0.1
k_max_mpc = 3.0
[stats.scattering]
scales = 3
orientations = 4
[stats.moments]
"""


def path(name):
    return os.path.join(d, name)


def write(name, text):
    with open(path(name), "w") as f:
        f.write(text)
    return path(name)


def run(inp, stats_text=STATS, extra=()):
    stats = write("s.toml", stats_text)
    out = path("out.h5")
    if os.path.exists(out):
        os.remove(out)
    r = subprocess.run([SPINFLIP, "-q", "measure", inp, "--stats", stats, "-o", out, *extra],
                       capture_output=True, text=True)
    return r, out


def values(out):
    with h5py.File(out, "r") as h:
        return {g: h[g]["values"][()] for g in h}


def expect_error(what, inp, needle, stats_text=STATS, extra=()):
    r, _ = run(inp, stats_text, extra)
    lines = [l for l in r.stderr.splitlines() if l.strip()]
    check(r.returncode == 2, f"{what}: exit status {r.returncode} == 2")
    check(len(lines) == 1 and needle in lines[0], f"{what}: one line containing '{needle}': {lines}")


img = rng.standard_normal((32, 40)).astype(np.float32)
np.save(path("c.npy"), img)
r, out = run(path("c.npy"))
check(r.returncode == 0, f"C-order float32 .npy measured ({r.stderr.strip()})")
base = values(out)

# Fortran order, float64 and big-endian give the same numbers (same float32 values).
np.save(path("f.npy"), np.asfortranarray(img))
np.save(path("d.npy"), img.astype(np.float64))
np.save(path("be.npy"), img.astype(">f4"))
for name in ("f.npy", "d.npy", "be.npy"):
    r, out = run(path(name))
    ok = r.returncode == 0 and all(np.array_equal(values(out)[g], base[g], equal_nan=True) for g in base)
    check(ok, f"{name} gives identical values to the C-order float32 file")

# HDF5 input written by h5py, as file.h5:/path
with h5py.File(path("in.h5"), "w") as h:
    h.create_dataset("maps/slice", data=img)
r, out = run(path("in.h5") + ":/maps/slice")
check(r.returncode == 0 and all(np.array_equal(values(out)[g], base[g], equal_nan=True) for g in base),
      f"HDF5 dataset input gives identical values ({r.stderr.strip()})")

# A 3D cube: slice kernels per slice along axis 2 (values n_units x n_coeff), chunk kernels once.
cube = rng.standard_normal((16, 16, 5)).astype(np.float32)
np.save(path("cube.npy"), cube)
r, out = run(path("cube.npy"), STATS + "[stats.power]\nbins = 3\nk_min_mpc = 0.2\nk_max_mpc = 3.0\n")
v = values(out)
check(v["slice_power"].shape[0] == 5 and v["power"].shape[0] == 1, "cube: 5 slice units, 1 chunk unit")
r2, out2 = run(path("cube.npy"), STATS, extra=("--threads", "3"))
check(all(np.array_equal(values(out2)[g], v[g], equal_nan=True) for g in ("slice_power", "scattering", "moments")),
      "--threads 3 gives the same values as one thread (kernels share no mutable state)")
with h5py.File(out, "r") as h:
    check(h["scattering"].attrs["reduce"] == "none" and h["scattering"].attrs["normalise"] == 0,
          "scattering group carries reduce/normalise attributes")
    check(list(h.attrs["input_shape"]) == [16, 16, 5], "root attribute input_shape")
    check(h["slice_power"]["k_lo"].shape == (8,), "axis datasets are n_coeff long")
    # Self-describing like the catalogue (docs/catalogue.md), read through h5py's dimension-scale API.
    sp = h["slice_power"]
    check(all("units" in sp[k].attrs and sp[k].attrs["description"] for k in sp), "units and description on every dataset")
    check(sp["values"].attrs["units"].startswith("mK^2 Mpc^2 (quantity 0, P)"), f"2D power units {sp['values'].attrs['units']}")
    check([dim.label for dim in sp["values"].dims] == ["unit", "coefficient"], "dimension labels")
    check(sp["k_lo"].attrs["units"] == "rad/pixel", "no --cell-mpc: wavenumbers in radians per pixel")
    check(set(sp["values"].dims[1].keys()) == {"quantity", "k_lo", "k_hi", "k_mean", "n_modes"}, "k axes are scales")
    check(list(h["moments"].attrs["quantity_names"]) == ["mean", "variance", "skewness", "excess_kurtosis"],
          "moments without a histogram name their four quantities")
r, out = run(path("cube.npy"), "[stats.moments]\nhistogram_edges = [-2.0, 0.0, 2.0]\n")
with h5py.File(out, "r") as h:
    q, names = h["moments"]["quantity"][()], list(h["moments"].attrs["quantity_names"])
    check(names[-1] == "histogram_fraction" and len(names) == len(set(q.tolist())) == 5,
          f"moments with a histogram: one name per quantity present ({names})")

# --- user errors: exit status 2, one line
expect_error("2D array with a 3D kernel", path("c.npy"), "3D chunks",
             "[stats.power]\nbins = 3\n")
# DESIGN.md §6: [stats.power] on a 2D array points to the 2D analogue.
expect_error("2D array with [stats.power]", path("c.npy"), "use [stats.slice_power]",
             "[stats.power]\nbins = 3\n")
nan = img.copy()
nan[3, 4] = np.nan
np.save(path("nan.npy"), nan)
expect_error("NaN in the array", path("nan.npy"), "not finite")
inf = img.copy()
inf[0, 0] = np.inf
np.save(path("inf.npy"), inf)
expect_error("Inf in the array", path("inf.npy"), "not finite")
expect_error("too few pixels for the scales", path("c.npy"), "at least 64",
             "[stats.scattering]\nscales = 6\n")
expect_error("missing input file", path("absent.npy"), "does not exist")
write("text.npy", "this is not numpy\n")
expect_error("not a .npy file", path("text.npy"), "not a .npy file")
raw = open(path("c.npy"), "rb").read()
with open(path("trunc.npy"), "wb") as f:
    f.write(raw[:30])
expect_error("truncated .npy header", path("trunc.npy"), "truncated .npy header")
with open(path("short.npy"), "wb") as f:
    f.write(raw[:-100])
expect_error("truncated .npy data", path("short.npy"), "data truncated")
np.save(path("int.npy"), np.arange(64, dtype=np.int32).reshape(8, 8))
expect_error("integer dtype", path("int.npy"), "is not supported")
np.save(path("line.npy"), np.zeros(100, np.float32))
expect_error("1D array", path("line.npy"), "2D slice or a 3D cube")
expect_error("missing HDF5 dataset", path("in.h5") + ":/maps/none", "no dataset /maps/none")
expect_error("unknown key with a suggestion", path("c.npy"), "bins", "[stats.slice_power]\nbinz = 3\n")
expect_error("value out of choices", path("c.npy"), "reduce", "[stats.scattering]\nreduce = \"sideways\"\n")
expect_error("no kernel table", path("c.npy"), "no [stats.*] kernel table", "# empty\n")
expect_error("k_max below k_min", path("c.npy"), "k_max_mpc",
             "[stats.slice_power]\nk_min_mpc = 2.0\nk_max_mpc = 1.0\n")
expect_error("unequal triangle lists", path("c.npy"), "equal",
             "[stats.slice_bispectrum]\nk1_mpc = [0.5, 0.6]\nk2_mpc = [0.5, 0.6, 0.7]\nangle_deg = [90]\n")
r, _ = run(path("c.npy"), extra=())
r = subprocess.run([SPINFLIP, "-q", "measure", path("c.npy"), "--stats", write("ok.toml", STATS), "-o",
                    os.path.join(d, "no", "such", "dir", "o.h5")], capture_output=True, text=True)
check(r.returncode == 2 and "folder" in r.stderr and "does not exist" in r.stderr, f"unwritable output: exit 2 ({r.stderr.strip()})")
finish()
