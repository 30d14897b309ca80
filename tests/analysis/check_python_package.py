"""The Python package (python/, pyproject.toml) as a user installs it: offline,
with Debian's python3 in a venv made with --system-site-packages and
`pip install --no-build-isolation --no-index`, then imported from the venv (not
from the source tree). Its select() is checked against h5py reading the same
catalogue directly (h5py as the outside reader, DESIGN §10), and every reader
must fail on a partial file with SpinflipFileError naming what is missing —
never a bare KeyError."""
import os
import shutil
import subprocess
import sys
import tempfile

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
import make_catalogue  # noqa: E402

src = os.path.join(os.environ["SPINFLIP_SOURCE_DIR"], "python")
tmp = tempfile.mkdtemp(prefix="spinflip-pypkg-")
# Build from a copy: pip builds in the tree it is given, and the source tree stays clean.
pkg = shutil.copytree(src, os.path.join(tmp, "python"), ignore=shutil.ignore_patterns("__pycache__", "build", "*.egg-info"))
venv = os.path.join(tmp, "venv")
subprocess.run(["/usr/bin/python3", "-m", "venv", "--system-site-packages", venv], check=True)
py = os.path.join(venv, "bin", "python")
p = subprocess.run([py, "-m", "pip", "install", "--no-build-isolation", "--no-index", "--quiet", pkg],
                   capture_output=True, text=True)
if p.returncode != 0:
    raise SystemExit(f"pip install failed ({p.returncode}):\n{p.stdout}\n{p.stderr}")

cat = os.path.join(tmp, "cat.h5")
make_catalogue.make(cat, n_fid=6, n_stencil=2, n_train_points=5, n_train_real=1, pending=2)
check = r'''
import sys, os
import h5py, numpy as np
import spinflip_catalogue as sc
cat, tmp = sys.argv[1], sys.argv[2]
assert "site-packages" in sc.__file__, f"imported from {sc.__file__}, not the venv"
fails = []
def check(ok, what):
    print(("ok   " if ok else "FAIL ") + what)
    if not ok:
        fails.append(what)
with h5py.File(cat) as f:
    role = np.array([r.decode() if isinstance(r, bytes) else r for r in f["design/role"][()]])
    ep, st = f["entries/point"][()], f["entries/status"][()]
    vals = f["stats/deep/power/values"][()]
    uz = f["stats/deep/power/unit_z"][()]
    q = f["stats/deep/power/quantity"][()] if "quantity" in f["stats/deep/power"] else None
train = np.flatnonzero((role[ep] == "training") & (st == 1))
with sc.open_catalogue(cat) as c:
    s = c.select("deep", "power", role="training", z=float(uz[1]) + 1e-3, as_xarray=False)
    check(s.dims == ("entry", "coefficient"), f"scalar z drops the unit dimension: {s.dims}")
    check(np.array_equal(s.coord("entry"), train), "entries: the done training entries (h5py count)")
    check(np.array_equal(s.values, vals[train][:, 1, :], equal_nan=True), "values == h5py rows at the nearest unit")
    check(float(s.coord("z")) == uz[1], "z coordinate is the unit's redshift")
    check(s.coord("params").shape == (len(train), len(c.param_names)), "params per entry")
    r = c.select("deep", "power", z=(uz.min(), uz[1]), as_xarray=False)
    check(r.dims == ("entry", "unit", "coefficient") and r.shape[1] == int((uz <= uz[1]).sum()), "z range keeps units")
    check(len(r.coord("entry")) == int((st == 1).sum()), "pending entries left out by default")
    try:
        c.select("deep", "power", role="nonsense")
        check(False, "unknown role refused")
    except ValueError as e:
        check("nonsense" in str(e), f"unknown role refused: {e}")
    try:
        import xarray  # noqa: F401
        da = c.select("deep", "power", role="training")
        check(da.dims == ("entry", "unit", "coefficient") and "z" in da.coords, "xarray DataArray with coordinates")
    except ImportError:
        print("note: xarray is not installed; select() returned the numpy form (checked above)")
# Partial files: a catalogue whose creation was interrupted, an export cut short.
part = os.path.join(tmp, "partial.h5")
with h5py.File(part, "w") as f:
    f.create_group("design")
for reader in (sc.open_catalogue, sc.load_export, sc.load_covariance, sc.load_fisher):
    try:
        reader(part)
        check(False, f"{reader.__name__} refuses a partial file")
    except sc.SpinflipFileError as e:
        check(part in str(e) and "partial" in str(e), f"{reader.__name__}: {e}")
    except KeyError as e:
        check(False, f"{reader.__name__} raised KeyError {e}")
try:
    sc.open_catalogue(os.path.join(tmp, "missing.h5"))
    check(False, "missing file refused")
except sc.SpinflipFileError as e:
    check("no such file" in str(e), f"missing file: {e}")
sys.exit(1 if fails else 0)
'''
p = subprocess.run([py, "-c", check, cat, tmp], capture_output=True, text=True, env={**os.environ, "PYTHONPATH": ""})
print(p.stdout, p.stderr)
shutil.rmtree(tmp, ignore_errors=True)
sys.exit(p.returncode)
