"""`spinflip run` refusals and entry failures: what a user can get wrong exits 2
with one line and leaves any catalogue untouched; an entry whose parameters the
model refuses is marked failed with its message while the others finish.
Catalogue contents are read back with h5py (DESIGN.md §10)."""
import hashlib
import os
import shutil
import sys
import tempfile

import h5py
import numpy as np

sys.path.insert(0, os.path.dirname(__file__))
from run_support import DATA, Checks, spinflip  # noqa: E402

check = Checks()


def sha(path):
    return hashlib.sha256(open(path, "rb").read()).hexdigest()


def one_error_line(p):
    lines = [l for l in p.stderr.splitlines() if "spinflip: error" in l]
    return len(lines) == 1


with tempfile.TemporaryDirectory() as tmp:
    for name in ("failing.toml", "failing_points.csv", "small.toml"):
        shutil.copy(os.path.join(DATA, name), tmp)
    failing, small = os.path.join(tmp, "failing.toml"), os.path.join(tmp, "small.toml")

    # An entry the cosmology refuses (omega_b > omega_m) fails; the campaign goes on.
    cat = os.path.join(tmp, "failing.h5")
    p = spinflip("run", failing, "-o", cat, ranks=2)
    check(p.returncode == 0, f"failing campaign still exits 0 ({p.returncode}: {p.stderr[-1500:]})")
    with h5py.File(cat, "r") as f:
        st = f["entries/status"][()]
        pts = f["design/points"][()][f["entries/point"][()]]
        names = [n.decode() for n in f["design/param_names"][()]]
        bad = pts[:, names.index("omega_b")] > pts[:, names.index("omega_m")]
        check(np.array_equal(st, np.where(bad, 2, 1)), f"exactly the omega_b > omega_m entry failed: {st}")
        msg = f["entries/error"][int(np.flatnonzero(bad)[0])].decode()
        check("omega_b" in msg and "omega_m" in msg, f"failure message names the parameters: {msg!r}")
        check(np.isnan(f["stats/clean/moments/values"][int(np.flatnonzero(bad)[0])]).all(), "failed entry has no values")
    p = spinflip("status", cat, "--require-complete")
    check(p.returncode == 0 and "failed 1" in p.stdout and "omega_b" in p.stdout,
          f"status: failures count as finished and are listed ({p.returncode}: {p.stdout})")
    p = spinflip("run", failing, "-o", cat, "--retry-failed")
    check(p.returncode == 0 and "1 to run" in p.stderr and "finished: 1 entries run, 4 done, 1 failed" in p.stderr,
          f"--retry-failed runs the failed entry again, which fails again ({p.stderr[-1500:]})")

    # A different campaign on an existing catalogue: refused, file untouched.
    before = sha(cat)
    p = spinflip("run", small, "-o", cat, ranks=2)
    check(p.returncode == 2 and one_error_line(p) and "different campaign" in p.stderr,
          f"different campaign refused with exit 2 ({p.returncode}: {p.stderr})")
    check(sha(cat) == before, "refused catalogue is byte for byte unchanged")

    # An edited campaign (same file, one value changed) is a different campaign too.
    edited = os.path.join(tmp, "edited.toml")
    open(edited, "w").write(open(failing).read().replace("seed = 5", "seed = 6"))
    p = spinflip("run", edited, "-o", cat)
    check(p.returncode == 2 and "different campaign" in p.stderr, f"edited seed refused ({p.stderr})")

    p = spinflip("run", small, "-o", os.path.join(tmp, "g3.h5"), "--group-size", "3", ranks=2)
    check(p.returncode == 2 and one_error_line(p) and "does not divide the 2 MPI ranks" in p.stderr,
          f"group size 3 on 2 ranks refused ({p.stderr})")
    check(not os.path.exists(os.path.join(tmp, "g3.h5")), "no catalogue made for a refused run")

    p = spinflip("run", small, "-o", "/nonexistent-spinflip/x.h5")
    check(p.returncode == 2 and one_error_line(p) and "does not exist" in p.stderr,
          f"unwritable output refused ({p.stderr})")

    p = spinflip("run", small, "-o", os.path.join(tmp, "mem.h5"), "--memory-limit-gb", "0.01")
    check(p.returncode == 2 and "memory" in p.stderr and "exceeds" in p.stderr,
          f"memory estimate over the limit refused ({p.stderr})")

    p = spinflip("run", os.path.join(tmp, "missing.toml"))
    check(p.returncode == 2 and one_error_line(p), f"missing campaign file: exit 2 ({p.stderr})")

check.finish()
