"""Round trip of a whole campaign through ingest: the tiny campaign
(jobs/tiny/campaign.toml) is run with its generator; every entry's cone is
written by `spinflip cone` (HDF5) and copied to .npy with numpy; two campaigns
with the tiny campaign's parameters and an [ingest] table (one manifest of the
HDF5 files on their frequency axis, one of the .npy files on a distance axis)
must give the same /stats values to 1e-6 relative, and /entries/source_sha256
must be hashlib.sha256 of each file. `spinflip plan` on a manifest naming a
missing file must exit 2 and name it; `plan --scan` must find a NaN that the
header checks cannot see; and `run` on a truncated file must exit 2 without
changing the existing catalogue.

Usage: check_ingest_campaign.py   (SPINFLIP, SPINFLIP_SOURCE_DIR, MPIEXEC in the environment)"""
import hashlib
import os
import re
import shutil
import subprocess
import sys
import tempfile

import h5py
import numpy as np

SPINFLIP = os.environ.get("SPINFLIP", "spinflip")
MPIEXEC = os.environ.get("MPIEXEC", "mpiexec")
SOURCE = os.environ.get("SPINFLIP_SOURCE_DIR", os.path.join(os.path.dirname(__file__), "..", ".."))
FAILURES = []


def check(ok, what):
    print(("ok   " if ok else "FAIL ") + what)
    if not ok:
        FAILURES.append(what)


def run(args, ranks=0, cwd=None):
    cmd = ([MPIEXEC, "-n", str(ranks), "--oversubscribe"] if ranks else []) + [SPINFLIP, *args]
    return subprocess.run(cmd, capture_output=True, text=True, cwd=cwd)


def must(r, what):
    if r.returncode != 0:
        print(f"FAIL {what}: exit {r.returncode}\n{r.stdout}\n{r.stderr}")
        sys.exit(1)


def main(d):
    with open(os.path.join(SOURCE, "jobs", "tiny", "campaign.toml")) as f:
        tiny = f.read()
    gen_toml = os.path.join(d, "gen.toml")
    with open(gen_toml, "w") as f:
        f.write(tiny.replace('output = "tiny.h5"', f'output = "{d}/gen.h5"'))
    must(run(["run", gen_toml], ranks=2, cwd=d), "run the generated tiny campaign")

    with h5py.File(os.path.join(d, "gen.h5"), "r") as g:
        points = g["entries/point"][...]
        reals = g["entries/realisation"][...]
        values = g["design/points"][...]
        roles = [r.decode() if isinstance(r, bytes) else r for r in g["design/role"][...]]
        names = [n.decode() if isinstance(n, bytes) else n for n in g["design/param_names"][...]]
        check(bool(np.all(g["entries/status"][...] == 1)), f"generated campaign: all {len(points)} entries done")

    os.makedirs(os.path.join(d, "cones"))
    rows_h5, rows_npy = [], []
    distance = None
    for i, (p, r) in enumerate(zip(points, reals)):
        h5 = os.path.join(d, "cones", f"e{i}.h5")
        must(run(["cone", gen_toml, "--point", str(p), "--realisation", str(r), "-o", h5], cwd=d), f"cone {i}")
        with h5py.File(h5, "r") as f:
            np.save(os.path.join(d, "cones", f"e{i}.npy"), f["delta_tb_mK"][...])  # numpy's own writer
            distance = f["distance_mpc"][...]
        vals = ",".join(repr(float(v)) for v in values[p])  # repr: the exact doubles
        rows_h5.append(f"cones/e{i}.h5,{r},{roles[p]},{vals}")
        rows_npy.append(f"cones/e{i}.npy,{r},{roles[p]},{vals}")
    header = "file,realisation,role," + ",".join(names)
    for name, rows in (("h5.csv", rows_h5), ("npy.csv", rows_npy)):
        with open(os.path.join(d, name), "w") as f:
            f.write(header + "\n" + "\n".join(rows) + "\n")

    # The tiny campaign without its [[designs]] blocks: the manifest is the design.
    body = re.sub(r"\n# Training:.*?(?=\n\[scenarios)", "\n", tiny, flags=re.S)
    check("[[designs]]" not in body, "ingest campaign text has no [[designs]]")
    layouts = {
        "h5": 'manifest = "h5.csv"\nlos_coordinate = "frequency_MHz"\nlos_dataset = "freq_MHz"\n',
        # The generator's slice centres, start + j·cell (docs/ingest.md).
        "npy": f'manifest = "npy.csv"\nlos_coordinate = "distance_mpc"\nlos_start = {float(distance[0])!r}\n'
               f'los_step = 2.5\n',
    }
    with h5py.File(os.path.join(d, "gen.h5"), "r") as g:
        ref = {}
        g["stats"].visititems(lambda n, o: ref.__setitem__(n, o[...]) if n.endswith("/values") else None)
    check(len(ref) >= 6, f"generated catalogue has {len(ref)} /stats value sets (2 scenarios × 3 kernels)")
    for kind, layout in layouts.items():
        toml = os.path.join(d, f"ingest_{kind}.toml")
        with open(toml, "w") as f:
            f.write(body.replace('output = "tiny.h5"', f'output = "{d}/ingest_{kind}.h5"') + "\n[ingest]\n" + layout)
        r = run(["plan", toml], cwd=d)
        check(r.returncode == 0, f"{kind}: plan exit {r.returncode} {r.stderr.strip()[:300]}")
        must(run(["run", toml], ranks=2, cwd=d), f"run the {kind} ingest campaign")
        with h5py.File(os.path.join(d, f"ingest_{kind}.h5"), "r") as g:
            check(bool(np.all(g["entries/status"][...] == 1)), f"{kind}: all entries done")
            check(np.array_equal(g["entries/point"][...], points) and np.array_equal(g["entries/realisation"][...], reals),
                  f"{kind}: same entries (point, realisation) as the generated campaign")
            worst = 0.0
            for n, a in ref.items():
                b = g["stats/" + n][...]
                if b.shape != a.shape:
                    check(False, f"{kind}: /stats/{n} shape {b.shape} vs {a.shape}")
                    continue
                # Relative to each dataset's largest magnitude per entry: coefficients
                # near zero carry the float32 cone's rounding, not a relative error.
                scale = np.max(np.abs(a.reshape(a.shape[0], -1)), axis=1).reshape((-1,) + (1,) * (a.ndim - 1))
                scale = np.where(scale > 0, scale, 1.0)
                both_nan = np.isnan(a) & np.isnan(b)  # an undefined coefficient must stay undefined
                check(bool(np.array_equal(np.isnan(a), np.isnan(b))), f"{kind}: /stats/{n}: NaN in the same places")
                w = float(np.max(np.where(both_nan, 0.0, np.abs(b - a) / scale)))
                print(f"     {kind}: /stats/{n}: worst relative difference {w:.3e}")
                worst = max(worst, w)
            print(f"     {kind}: worst relative difference over /stats = {worst:.3e}")
            check(worst <= 1e-6, f"{kind}: /stats equal the generated campaign's to 1e-6 relative ({worst:.2e})")
            sha = [s.decode() if isinstance(s, bytes) else s for s in g["entries/source_sha256"][...]]
            files = [s.decode() if isinstance(s, bytes) else s for s in g["entries/source_file"][...]]
            want = []
            for i in range(len(points)):
                with open(os.path.join(d, "cones", f"e{i}.{kind}"), "rb") as f:
                    want.append(hashlib.sha256(f.read()).hexdigest())
            check(sha == want, f"{kind}: /entries/source_sha256 == hashlib.sha256 of each file")
            check(all(os.path.samefile(f, os.path.join(d, "cones", f"e{i}.{kind}")) for i, f in enumerate(files)),
                  f"{kind}: /entries/source_file names each entry's file")
            check(bool(np.all(np.isnan(g["cones/history/x_hi"][...]))), f"{kind}: x_hi history is NaN (not in files)")

    # A manifest naming a missing file: plan lists it and refuses.
    with open(os.path.join(d, "missing.csv"), "w") as f:
        f.write(header + "\n" + "\n".join(rows_npy).replace("cones/e3.npy", "cones/gone.npy") + "\n")
    toml = os.path.join(d, "ingest_missing.toml")
    with open(toml, "w") as f:
        f.write(body + "\n[ingest]\n" + layouts["npy"].replace("npy.csv", "missing.csv"))
    r = run(["plan", toml], cwd=d)
    check(r.returncode == 2, f"plan on a missing file: exit {r.returncode} (2 expected)")
    check("gone.npy" in r.stderr, f"plan names the missing file: {r.stderr.strip()[:300]}")

    # A NaN in a file is invisible to the header checks and found by `plan --scan`.
    npy_toml = os.path.join(d, "ingest_npy.toml")
    cone5 = os.path.join(d, "cones", "e5.npy")
    a = np.load(cone5)
    a[1, 2, 3] = np.nan
    np.save(cone5, a)
    r = run(["plan", npy_toml], cwd=d)
    check(r.returncode == 0, f"plan without --scan reads headers only: exit {r.returncode}")
    r = run(["plan", npy_toml, "--scan"], cwd=d)
    check(r.returncode == 2 and "e5.npy" in r.stderr, f"plan --scan finds the NaN in e5.npy: exit {r.returncode} "
                                                      f"{r.stderr.strip()[:300]}")

    # A truncated file under an existing catalogue: run refuses (exit 2, one line naming
    # the file) and the catalogue's bytes are unchanged (DESIGN.md §8: nothing is lost).
    catalogue = os.path.join(d, "ingest_npy.h5")
    with open(catalogue, "rb") as f:
        before = hashlib.sha256(f.read()).hexdigest()
    cone3 = os.path.join(d, "cones", "e3.npy")
    size = os.path.getsize(cone3)
    with open(cone3, "r+b") as f:
        f.truncate(size // 2)
    r = run(["run", npy_toml, "--retry-failed"], ranks=2, cwd=d)
    check(r.returncode == 2 and "e3.npy" in r.stderr, f"run on a truncated file: exit {r.returncode} "
                                                      f"{r.stderr.strip()[-300:]}")
    with open(catalogue, "rb") as f:
        check(hashlib.sha256(f.read()).hexdigest() == before, "the existing catalogue is byte-unchanged")


if __name__ == "__main__":
    d = tempfile.mkdtemp(prefix="spinflip-ingest-campaign-")
    try:
        main(d)
    finally:
        if not os.environ.get("KEEP"):
            shutil.rmtree(d, ignore_errors=True)
    if FAILURES:
        print(f"{len(FAILURES)} failure(s)")
        sys.exit(1)
    print("all ok")
