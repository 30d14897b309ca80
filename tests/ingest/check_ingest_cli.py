"""External checks of ingest through the CLI: cones written with numpy (.npy,
C and Fortran order, transposed), h5py (chunked float64 in K, on a frequency
or a reversed redshift axis) and raw float32 with a sidecar, read back by
`spinflip ingest CAMPAIGN --cone I -o OUT.npy`, must equal the generator's cone;
a non-uniform distance axis must match numpy.interp; every bad input gives
one line and exit status 2.

Usage: check_ingest_cli.py MAKE_CONE   (SPINFLIP in the environment)"""
import hashlib
import os
import shutil
import subprocess
import sys
import tempfile

import h5py
import numpy as np

SPINFLIP = os.environ.get("SPINFLIP", "spinflip")
MPIEXEC = os.environ.get("MPIEXEC", "mpiexec")
MAKE_CONE = sys.argv[1]
FAILURES = []
N, NL, CELL, ZMIN, ZMAX = 12, 40, 2.0, 9.0, 9.2


def check(ok, what):
    print(("ok   " if ok else "FAIL ") + what)
    if not ok:
        FAILURES.append(what)


def campaign(d, name, ingest_lines):
    path = os.path.join(d, name + ".toml")
    with open(path, "w") as f:
        f.write(f"""[parameters.ionizing_efficiency]
min = 10.0
max = 60.0
fiducial = 30.0

[cone]
n_perp = {N}
n_los = {NL}
cell_mpc = {CELL}
z_min = {ZMIN}
z_max = {ZMAX}

[sources]
bubble_radius_max_mpc = 20.0

[ingest]
{ingest_lines}
""")
    return path


def manifest(d, name, rows, header="file,realisation,ionizing_efficiency"):
    path = os.path.join(d, name)
    with open(path, "w") as f:
        f.write(header + "\n" + "".join(r + "\n" for r in rows))
    return name


def run(args, mpi=0):
    cmd = ([MPIEXEC, "-n", str(mpi), "--oversubscribe"] if mpi else []) + [SPINFLIP, *args]
    return subprocess.run(cmd, capture_output=True, text=True)


def read_back(camp, cone, d, mpi=0):
    out = os.path.join(d, f"out-{os.path.basename(camp)}-{cone}-{mpi}.npy")
    r = run(["ingest", camp, "--cone", str(cone), "-o", out], mpi)
    if r.returncode != 0:
        check(False, f"ingest --cone {cone} {camp}: exit {r.returncode}: {r.stderr.strip()}")
        return None, r
    return np.load(out), r


def rel(a, b):
    return float(np.max(np.abs(a.astype(np.float64) - b)) / np.max(np.abs(b)))


d = tempfile.mkdtemp(prefix="spinflip-ingest-cli-")
subprocess.run([MAKE_CONE, d, str(N), str(NL), str(CELL), str(ZMIN), str(ZMAX), "7"], check=True)
cone = np.load(os.path.join(d, "cone.npy")).astype(np.float64)  # (x, y, los), mK
dist, z, freq = np.load(os.path.join(d, "grid.npy"))
assert cone.shape == (N, N, NL) and np.std(cone) > 0

# --- Round trips (1e-6 relative, as the issue asks) --------------------------
np.save(os.path.join(d, "c.npy"), cone.astype(np.float32))
np.save(os.path.join(d, "f.npy"), np.asfortranarray(cone.astype(np.float32)))
with open(os.path.join(d, "f.npy"), "rb") as f:  # numpy really wrote Fortran order
    check(b"'fortran_order': True" in f.read(128), "numpy wrote f.npy in Fortran order")
np.save(os.path.join(d, "t.npy"), np.transpose(cone, (2, 0, 1)).astype(np.float64))  # (los, x, y)
with h5py.File(os.path.join(d, "freq.h5"), "w") as h:
    h.create_dataset("cones/dtb", data=cone / 1000.0, chunks=(5, 7, 3), dtype="f8")  # K
    h["cones/freq"] = freq  # decreasing with distance
with h5py.File(os.path.join(d, "z.h5"), "w") as h:
    h.create_dataset("dtb", data=cone[:, :, ::-1].astype(np.float32), chunks=(4, 4, 8))  # far end first
    h["z"] = z[::-1]
los = f"los_coordinate = \"distance_mpc\"\nlos_start = {dist[0]!r}\nlos_step = {CELL!r}"
cases = [
    ("npy C order", campaign(d, "c", f'manifest = "{manifest(d, "c.csv", ["c.npy,0,30"])}"\n{los}')),
    ("npy Fortran order", campaign(d, "f", f'manifest = "{manifest(d, "f.csv", ["f.npy,0,30"])}"\n{los}')),
    ("npy (los, x, y) float64", campaign(d, "t", f'manifest = "{manifest(d, "t.csv", ["t.npy,0,30"])}"\n{los}\n'
                                               'axis_order = ["los", "x", "y"]')),
    ("h5py float64 K, frequency axis", campaign(d, "hf", f'manifest = "{manifest(d, "hf.csv", ["freq.h5,0,30"])}"\n'
                                                        'dataset = "/cones/dtb"\nunits = "K"\n'
                                                        'los_coordinate = "frequency_MHz"\nlos_dataset = "cones/freq"')),
    ("h5py float32, reversed redshift axis", campaign(d, "hz", f'manifest = "{manifest(d, "hz.csv", ["z.h5,0,30"])}"\n'
                                                              'dataset = "dtb"\nlos_coordinate = "redshift"\n'
                                                              'los_dataset = "z"')),
]
for what, camp in cases:
    r = run(["ingest", camp])
    check(r.returncode == 0 and "ingest: OK, 1 cones" in r.stdout, f"{what}: check passes ({r.stderr.strip()})")
    got, r = read_back(camp, 0, d)
    if got is not None:
        e = rel(got, cone)
        check(got.shape == cone.shape and e <= 1e-6, f"{what}: equals the generator's cone, rel. diff {e:.2e} <= 1e-6")
        src = {"npy C order": "c.npy", "npy Fortran order": "f.npy", "npy (los, x, y) float64": "t.npy",
               "h5py float64 K, frequency axis": "freq.h5", "h5py float32, reversed redshift axis": "z.h5"}[what]
        with open(os.path.join(d, src), "rb") as f:
            digest = hashlib.sha256(f.read()).hexdigest()  # Python's hashlib as the reference
        check(f"sha256 {digest}" in r.stdout, f"{what}: reports the file's sha256 (hashlib)")

# Two ranks read by slab and assemble the same cone.
got2, _ = read_back(cases[3][1], 0, d, mpi=2)
got1, _ = read_back(cases[3][1], 0, d)
if got1 is not None and got2 is not None:
    check(np.array_equal(got1, got2), "HDF5 read by a 2-rank group equals the serial read bit for bit")

# --- Cones written by `spinflip cone` (HDF5), and by numpy from them ----------
if "cone " in run(["--help"]).stdout:
    gen = os.path.join(d, "gen.toml")
    with open(gen, "w") as f:
        f.write(open(campaign(d, "gen0", "manifest = 'x.csv'\nlos_coordinate = 'redshift'")).read()
                .split("[ingest]")[0] + '[[designs]]\nkind = "fiducial"\nrealisations = 2\n')
    rows, ref = [], {}
    for r_ in (0, 1):
        out = os.path.join(d, f"gen_r{r_}.h5")
        g = run(["-q", "cone", gen, "--point", "0", "--realisation", str(r_), "-o", out])
        check(g.returncode == 0, f"spinflip cone realisation {r_} ({g.stderr.strip()})")
        with h5py.File(out, "r") as h:  # h5py reads what the generator wrote, as any user would
            ref[r_] = h["delta_tb_mK"][()].astype(np.float64)
            np.save(os.path.join(d, f"gen_r{r_}.npy"), h["delta_tb_mK"][()])
        rows += [f"gen_r{r_}.h5,{r_},30"]
    # Default dataset (delta_tb_mK), the file's own frequency axis.
    camp = campaign(d, "gen_h5", f'manifest = "{manifest(d, "gen_h5.csv", rows)}"\n'
                                 'los_coordinate = "frequency_MHz"\nlos_dataset = "freq_MHz"')
    camp_npy = campaign(d, "gen_npy", f'manifest = "{manifest(d, "gen_npy.csv", ["gen_r0.npy,0,30", "gen_r1.npy,1,30"])}"\n{los}')
    for c_, what in ((camp, "spinflip cone HDF5"), (camp_npy, "numpy .npy of spinflip cone")):
        r = run(["ingest", c_])
        check(r.returncode == 0, f"{what}: check passes ({r.stderr.strip()})")
        for r_ in (0, 1):
            got, _ = read_back(c_, r_, d)
            if got is not None:
                e = rel(got, ref[r_])
                check(e <= 1e-6, f"{what} realisation {r_}: ingested equals generated, rel. diff {e:.2e} <= 1e-6")
    check(rel(ref[0], ref[1]) > 1e-3, "the two realisations differ (the check can tell cones apart)")
else:
    print("skip spinflip cone checks: this build has no cone verb")

# --- Non-uniform distance axis vs numpy.interp (raw float32 + sidecar) --------
rng = np.random.default_rng(3)
L = 37
u = np.linspace(0.0, 1.0, L) ** 1.5
dj = (dist[0] - 0.7) + u * (dist[-1] - dist[0] + 1.9)  # covers the grid, non-uniform
vals = rng.normal(size=(N, N, L)).astype(np.float32)
vals.tofile(os.path.join(d, "raw.f32"))
with open(os.path.join(d, "raw.f32.toml"), "w") as f:
    f.write(f"shape = [{N}, {N}, {L}]\nlos_values = [{', '.join(repr(float(x)) for x in dj)}]\n")
camp = campaign(d, "raw", f'manifest = "{manifest(d, "raw.csv", ["raw.f32,0,30"])}"\nlos_coordinate = "distance_mpc"')
got, _ = read_back(camp, 0, d)
if got is not None:
    ref = np.empty((N, N, NL))
    for i in range(N):
        for j in range(N):
            ref[i, j] = np.interp(dist, dj, vals[i, j].astype(np.float64))  # numpy's linear interpolation
    e = float(np.max(np.abs(got - ref)))
    # float32 output of values of order 1-4: a few 1e-7 (float rounding).
    check(e <= 1e-6, f"raw non-uniform distance axis equals numpy.interp, max abs diff {e:.2e} <= 1e-6")

# --- Bad input: every problem one line, exit 2 ----------------------------
np.save(os.path.join(d, "trunc.npy"), cone.astype(np.float32))
with open(os.path.join(d, "trunc.npy"), "r+b") as f:
    f.truncate(os.path.getsize(os.path.join(d, "trunc.npy")) - 1000)
with h5py.File(os.path.join(d, "nodata.h5"), "w") as h:
    h["other"] = cone
with h5py.File(os.path.join(d, "rank2.h5"), "w") as h:
    h["dtb"] = cone[:, :, 0]
np.save(os.path.join(d, "short.npy"), cone[:, :, :30].astype(np.float32))
nan = cone.astype(np.float32).copy()
nan[1, 2, 3] = np.nan
np.save(os.path.join(d, "nan.npy"), nan)
rows = ["c.npy,0,30",          # 2: fine
        "trunc.npy,1,30",      # 3: truncated .npy
        "nodata.h5,2,30",      # 4: HDF5 path that does not exist
        "rank2.h5,3,30",       # 5: dataset of the wrong rank
        "c.npy,4,",            # 6: missing parameter
        "c.npy,5,40",          # 7: same file, different parameters
        "gone.npy,6,30",       # 8: missing file
        "f.npy,0,30",          # 9: duplicate (30, realisation 0)
        "short.npy,7,30",      # 10: band not covered
        "nan.npy,8,30"]        # 11: NaN (with --scan)
bad = campaign(d, "bad", f'manifest = "{manifest(d, "bad.csv", rows)}"\ndataset = "dtb"\n{los}')
expected = {
    ":3: ": "truncated .npy",
    ":4: ": "no HDF5 object 'dtb'",
    ":5: ": "has rank 2, a light cone needs rank 3",
    ":6: ": "parameter ionizing_efficiency is missing",
    ":7: ": "with different parameters",
    ":8: ": "no such file",
    ":9: ": "duplicate: parameters (ionizing_efficiency = 30) with realisation 0",
    ":10: ": "band not covered",
    ":11: ": "NaN or Inf at file index (1, 2, 3)",
}
for scan in (False, True):
    r = run(["ingest", bad] + (["--scan"] if scan else []))
    lines = [l for l in r.stderr.splitlines() if l.startswith("spinflip: error: ")]
    check(r.returncode == 2, f"bad manifest{' --scan' if scan else ''}: exit status 2 (got {r.returncode})")
    for where, text in expected.items():
        if where == ":11: " and not scan:
            check(not any("NaN" in l for l in lines), "no NaN reported without --scan")
            continue
        hits = [l for l in lines if f"bad.csv{where}" in l and text in l]
        check(len(hits) == 1, f"bad.csv{where.strip()} gives one line with '{text}'")
    n_expected = len(expected) - (0 if scan else 1)
    check(len(lines) == n_expected, f"{len(lines)} problem lines, {n_expected} expected")
    check(all("\n" not in l for l in lines) and "bad.csv:2:" not in r.stderr, "the good row is not blamed")
r = run(["ingest", campaign(d, "nomanifest", f'manifest = "none.csv"\n{los}')])
check(r.returncode == 2 and "ingest.manifest" in r.stderr and len(r.stderr.strip().splitlines()) == 1,
      f"missing manifest: one line naming ingest.manifest, exit 2 ({r.stderr.strip()})")

if FAILURES:
    sys.exit(f"{len(FAILURES)} check(s) failed")
shutil.rmtree(d)
print("all ingest CLI checks passed")
