"""`spinflip status`: counts, failure messages and the exit statuses that the job
scripts (jobs/templates/slurm.sh.in) chain on: 0, 3 while pending with
--require-complete, 2 for a path that is not a catalogue. The counts are checked
against h5py's reading of the same file (DESIGN.md §10)."""
import os
import subprocess
import sys
import tempfile

import h5py
import numpy as np

writer = sys.argv[1]
spinflip = os.environ["SPINFLIP"]
mpiexec = os.environ.get("MPIEXEC", "mpiexec")
failures = []


def check(cond, what):
    if not cond:
        failures.append(what)
        print("FAIL:", what)


def status(*args):
    p = subprocess.run([spinflip, "status", *args], capture_output=True, text=True)
    return p.returncode, p.stdout, p.stderr


with tempfile.TemporaryDirectory() as tmp:
    partial = os.path.join(tmp, "partial.h5")
    full = os.path.join(tmp, "full.h5")
    subprocess.run([mpiexec, "-n", "2", "--oversubscribe", writer, partial], check=True)
    subprocess.run([mpiexec, "-n", "2", "--oversubscribe", writer, full, "complete"], check=True)

    with h5py.File(partial, "r") as f:
        st = f["entries/status"][()]
    done, failed, pending = (int(np.sum(st == v)) for v in (1, 2, 0))
    rc, out, err = status(partial)
    print(out)
    check(rc == 0, f"status exits 0 without --require-complete (got {rc}: {err})")
    check(f"done {done} " in out and f"failed {failed}," in out and f"pending {pending}" in out,
          "counts agree with h5py")
    check("entry 4 (point 1, realisation 1): ModelError: sample failure" in out, "failure message shown")
    check("design 1 (stencil): done 4, failed 1, pending 1" in out, "per-design counts")
    check("noisy/power: 2 chunks × 4 coefficients" in out, "kernel shapes")
    rc, out, err = status(partial, "--require-complete")
    check(rc == 3, f"--require-complete exits 3 while pending (got {rc})")

    rc, out, err = status(full, "--require-complete")
    check(rc == 0 and "\ncomplete\n" in out, f"complete catalogue exits 0 (got {rc}: {out})")

    rc, out, err = status(os.path.join(tmp, "missing.h5"))
    check(rc == 2 and err.count("\n") == 1 and "does not exist" in err, f"missing file: exit 2, one line ({rc}: {err})")
    junk = os.path.join(tmp, "junk.h5")
    with open(junk, "w") as f:
        f.write("not a catalogue")
    rc, out, err = status(junk)
    check(rc == 2 and "not an HDF5 file" in err, f"junk file: exit 2 ({rc}: {err})")
    rc, out, err = (lambda p: (p.returncode, p.stdout, p.stderr))(subprocess.run(
        [mpiexec, "-n", "2", "--oversubscribe", spinflip, "status", junk], capture_output=True, text=True))
    check(rc == 2 and err.count("spinflip: error") == 1, f"junk file under mpiexec: exit 2, one message ({rc}: {err})")

print(f"{0 if failures else 1} passed, {len(failures)} failed")
sys.exit(1 if failures else 0)
