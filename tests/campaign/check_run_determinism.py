"""`spinflip run` on jobs/tiny at 1, 2 and 4 ranks (group size 1) gives catalogues
whose data are identical byte for byte (DESIGN.md §3), read back with h5py
(DESIGN.md §10); group size 2 (FFTW-MPI slabs) agrees to float rounding. The
`spinflip cone` file of an entry matches that entry's catalogue rows.
FFT plans (DESIGN.md §11): the runs share one wisdom (prepared by `spinflip plan
--fft-plans` into a cache of this test's own), each catalogue records its sha256
and keeps it beside itself; a run with another wisdom (none: estimate plans)
agrees to float rounding."""
import hashlib
import json
import os
import sys
import tempfile

import h5py
import numpy as np

sys.path.insert(0, os.path.dirname(__file__))
from catalogue_compare import compare  # noqa: E402
from run_support import TINY, Checks, spinflip  # noqa: E402

check = Checks()
with tempfile.TemporaryDirectory() as tmp:
    os.environ["XDG_CACHE_HOME"] = os.path.join(tmp, "cache")  # this test's own wisdom cache
    p = spinflip("plan", TINY, "--fft-plans")
    check(p.returncode == 0 and "fft plans (measure" in p.stdout and " s  measured " in p.stdout,
          f"plan --fft-plans measures and prints the planning time per shape ({p.returncode}: {p.stdout[-1500:]})")
    cache = os.path.join(tmp, "cache", "spinflip", "fftw-wisdom")
    check(os.path.getsize(cache) > 0, "plan --fft-plans keeps the wisdom in $XDG_CACHE_HOME/spinflip")
    paths = {}
    for ranks in (1, 2, 4):
        paths[ranks] = os.path.join(tmp, f"np{ranks}.h5")
        p = spinflip("run", TINY, "-o", paths[ranks], ranks=ranks)
        check(p.returncode == 0, f"run at {ranks} ranks exits 0 ({p.returncode}: {p.stderr[-2000:]})")
        check("finished: 26 entries run, 26 done" in p.stderr, f"run at {ranks} ranks reports all 26 entries done")
    for ranks in (2, 4):
        diff = compare(paths[1], paths[ranks])
        check(not diff, f"1 vs {ranks} ranks: {diff}")
    shas = {}
    for ranks, path in paths.items():
        with h5py.File(path, "r") as f:
            shas[ranks] = f.attrs["fft_wisdom_sha256"]
        own = hashlib.sha256(open(path + ".fftw-wisdom", "rb").read()).hexdigest()  # hashlib: the reference sha256
        check(shas[ranks] == own, f"{ranks} ranks: fft_wisdom_sha256 is the sha256 of the wisdom kept beside it")
    check(len(set(shas.values())) == 1, f"one wisdom for 1, 2 and 4 ranks: {shas}")

    # Another wisdom: an empty file beside a new catalogue means no wisdom, so every
    # plan is FFTW_ESTIMATE's. The values agree to float rounding: float32 transforms
    # round to ~ε log2 N ≈ 1e-6 of the field's scale (ε = 6e-8, N ~ 1e5), so 2e-6
    # relative, plus 2e-6 of the dataset's largest value for coefficients that are the
    # rounding residue of an exact zero (a mean without k = 0, wedge-emptied bins).
    other = os.path.join(tmp, "other.h5")
    open(other + ".fftw-wisdom", "w").close()
    p = spinflip("run", TINY, "-o", other, ranks=2)
    check(p.returncode == 0, f"run with an empty wisdom exits 0 ({p.stderr[-2000:]})")
    with h5py.File(other, "r") as f:
        check(f.attrs["fft_wisdom_sha256"] == hashlib.sha256(b"").hexdigest(), "the empty wisdom is recorded")
    diff = compare(paths[1], other, rtol=2e-6, atol=0.0, scale_atol=2e-6)
    check(not diff, f"measured vs estimate plans: {diff}")

    g2 = os.path.join(tmp, "g2.h5")
    p = spinflip("run", TINY, "-o", g2, "--group-size", "2", ranks=2)
    check(p.returncode == 0, f"group size 2 exits 0 ({p.stderr[-2000:]})")
    # Distributed vs serial FFT: same values up to float rounding (DESIGN.md §3),
    # with the tolerance of the different-wisdom check above (another plan of the
    # same float32 transforms: 2e-6 relative, plus 2e-6 of a dataset's scale for
    # coefficients that are the rounding residue of an exact zero).
    diff = compare(paths[1], g2, rtol=2e-6, atol=0.0, scale_atol=2e-6)
    check(not diff, f"group size 1 vs 2: {diff}")

    with h5py.File(paths[1], "r") as f:
        st = f["entries/status"][()]
        check((st == 1).all(), "every entry done")
        check(np.array_equal(f["entries/params"][()], f["design/points"][()][f["entries/point"][()]]),
              "entries/params are the design points of entries/point")
        for scen in f["stats"].attrs["scenarios"]:
            for kern in f["stats"][scen].attrs["kernels"]:
                g = f["stats"][scen][kern]
                v = g["values"][()]
                check(v.shape[0] == st.size and not np.isnan(v).all(axis=(1, 2)).any(),
                      f"{scen}/{kern}: every done entry has values")
                if g.attrs["unit_kind"] == "slice":
                    # ν = ν21 / (1 + z), ν21 = 1420.405751768 MHz (common practice).
                    check(np.allclose(g["unit_freq_MHz"][()], 1420.405751768 / (1 + g["unit_z"][()]), rtol=1e-12),
                          f"{scen}/{kern}: unit frequencies and redshifts agree")
        hz = f["cones/history/z"][()]
        check(np.all(np.diff(hz) > 0), "history redshifts increase along the line of sight")
        point0 = int(np.flatnonzero(f["entries/point"][()] == 3)[0])
        real0 = int(f["entries/realisation"][point0])
        xh, tb = f["cones/history/x_hi"][point0], f["cones/history/mean_tb_mK"][point0]

    progress = json.load(open(paths[1] + ".progress.json"))
    check(progress["state"] == "finished" and progress["done"] == 26 and progress["pending"] == 0,
          f"progress file says finished: {progress}")

    cone = os.path.join(tmp, "cone.h5")
    # One rank, as the catalogue's group size 1 made it: then bit-identical.
    p = spinflip("cone", TINY, "--point", "3", "--realisation", str(real0), "-o", cone, "--scenario", "noisy")
    check(p.returncode == 0, f"cone verb exits 0 ({p.stderr[-2000:]})")
    with h5py.File(cone, "r") as c:
        d = c["delta_tb_mK"][()]
        check(d.shape == (32, 32, 128) and d.dtype == np.float32, f"cone shape {d.shape}")
        check(np.array_equal(c["z"][()], hz), "cone z axis is the catalogue's history z")
        check(np.array_equal(c["history/x_hi"][()], xh), "cone history = the catalogue row of that entry")
        # The stored mean is the plane mean of δT_b (numpy, float32 data: 1e-5 relative).
        check(np.allclose(d.mean(axis=(0, 1), dtype=np.float64), c["history/mean_tb_mK"][()], rtol=1e-5, atol=1e-6),
              "history mean_tb_mK = numpy mean of each plane")
        check(np.array_equal(c["history/mean_tb_mK"][()], tb), "cone mean_tb = the catalogue row")
        check(c["observed/noisy"].shape == d.shape, "observed cone written")
        check(np.allclose(c["freq_MHz"][()], 1420.405751768 / (1 + c["z"][()]), rtol=1e-12), "cone ν(z)")

    p = spinflip("cone", TINY, "--point", "999", "-o", cone)
    check(p.returncode == 2 and "--point 999" in p.stderr, f"cone: bad point exits 2 ({p.stderr})")

check.finish()
