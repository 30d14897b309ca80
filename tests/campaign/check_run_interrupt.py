"""Interruptions and faults of `spinflip run` (issue 19; docs/driver.md):

- Ctrl-C (SIGINT) on a one-process run and under mpiexec is a clean,
  resumable stop: exit status 3, a message naming the signal, the progress
  file saying "stopped", and a later run completing the catalogue to the same
  data as an uninterrupted run (compared dataset by dataset with h5py).
- The lock follows the file: a second run through a symlink to a catalogue in
  use is refused with one line and exit 2.
- A full disk while entries are written (imitated by a file size limit,
  RLIMIT_FSIZE with SIGXFSZ ignored, so writes past it fail with EFBIG as on a
  full file system; POSIX setrlimit(2)): one error line and exit 2, the
  catalogue still opens with every done entry whole, the progress file says
  "error", and a later run resumes it to the same data. A catalogue that cannot
  fit at all is refused before a byte is written.
"""
import json
import os
import resource
import signal
import subprocess
import sys
import tempfile
import time

import h5py
import numpy as np

sys.path.insert(0, os.path.dirname(__file__))
from catalogue_compare import compare  # noqa: E402
from run_support import TINY, Checks, command, spinflip  # noqa: E402

check = Checks()


def progress(path):
    try:
        return json.load(open(path + ".progress.json"))
    except (OSError, ValueError):
        return None


def wait_done(path, n, proc, limit=120):
    t0 = time.time()
    while time.time() - t0 < limit and proc.poll() is None:
        p = progress(path)
        if p and p["state"] == "running" and p["done"] >= n:
            return True
        time.sleep(0.05)
    return False


def one_error_line(stderr):
    return sum(l.startswith("spinflip: error:") for l in stderr.splitlines()) == 1 and "Traceback" not in stderr


def consistent(path, what):
    """Opens with h5py; only pending (0) or done (1) entries; every done entry has its rows."""
    with h5py.File(path, "r") as f:
        st = f["entries/status"][()]
        ok = set(np.unique(st)) <= {0, 1}
        for scen in f["stats"].attrs["scenarios"]:
            for kern in f["stats"][scen].attrs["kernels"]:
                v = f["stats"][scen][kern]["values"][()]
                ok &= not np.isnan(v[st == 1]).all(axis=(1, 2)).any()
        check(ok, f"{what}: the catalogue opens and its done entries have data")
        return int((st == 1).sum()), len(st)


def size_limit(nbytes):
    def apply():
        signal.signal(signal.SIGXFSZ, signal.SIG_IGN)  # ignored dispositions survive exec
        resource.setrlimit(resource.RLIMIT_FSIZE, (nbytes, nbytes))
    return apply


# Under a file size limit MPI_Init itself fails when PMIx keeps its data store
# in shared-memory files (the gds/ds21 component); the in-memory store (hash)
# needs no file, so the limit falls on spinflip's own writes only.
LIMITED_ENV = dict(os.environ, PMIX_MCA_gds="hash")


with tempfile.TemporaryDirectory(prefix="spinflip-interrupt-") as tmp:
    # jobs/tiny with 40 fiducial realisations and a short progress interval, so
    # a signal surely lands while entries remain.
    longer = os.path.join(tmp, "longer.toml")
    text = open(TINY).read().replace("progress_interval_s = 2", "progress_interval_s = 0.2")
    text = text.replace('kind = "fiducial"\nrealisations = 4', 'kind = "fiducial"\nrealisations = 40')
    check("realisations = 40" in text, "longer tiny campaign made")
    open(longer, "w").write(text)
    ref = os.path.join(tmp, "ref.h5")
    p = spinflip("run", longer, "-o", ref, ranks=2)
    check(p.returncode == 0, f"reference run ({p.stderr[-800:]})")

    # 1. Ctrl-C on one process: a clean stop, exit 3, resumable to the same data.
    out = os.path.join(tmp, "int1.h5")
    proc = subprocess.Popen(command(["run", longer, "-o", out]), stderr=subprocess.PIPE, text=True)
    check(wait_done(out, 1, proc), "one-process run got going")
    proc.send_signal(signal.SIGINT)
    _, err = proc.communicate(timeout=120)
    check(proc.returncode == 3 and "stopped early on SIGINT" in err and "resumable" in err,
          f"SIGINT, one process: exit 3, names SIGINT, resumable ({proc.returncode}: {err[-800:]})")
    check((progress(out) or {}).get("state") == "stopped", f"SIGINT: progress file says stopped ({progress(out)})")
    done, total = consistent(out, "SIGINT, one process")
    check(0 < done < total, f"SIGINT stopped part way ({done} of {total})")
    p = spinflip("run", longer, "-o", out)
    check(p.returncode == 0 and "finished" in p.stderr, f"resume after SIGINT ({p.stderr[-600:]})")
    diff = compare(ref, out)
    check(not diff, f"SIGINT + resume = uninterrupted: {diff}")

    # 2. Ctrl-C to mpiexec: OpenMPI's mpiexec passes it on to the ranks as
    #    SIGTERM (mpirun(1), "Signal Propagation"), which each rank reports.
    out = os.path.join(tmp, "int2.h5")
    proc = subprocess.Popen(command(["run", longer, "-o", out], ranks=2), stderr=subprocess.PIPE, text=True)
    check(wait_done(out, 2, proc), "two-rank run got going")
    proc.send_signal(signal.SIGINT)
    _, err = proc.communicate(timeout=120)
    check("stopped early on SIG" in err and "resumable" in err,
          f"SIGINT to mpiexec: the ranks stop cleanly and name the signal ({proc.returncode}: {err[-1200:]})")
    check((progress(out) or {}).get("state") == "stopped", f"SIGINT to mpiexec: progress says stopped ({progress(out)})")
    consistent(out, "SIGINT to mpiexec")
    p = spinflip("run", longer, "-o", out, ranks=2)
    check(p.returncode == 0 and "finished" in p.stderr, f"resume after SIGINT to mpiexec ({p.stderr[-600:]})")
    check(not compare(ref, out), "SIGINT to mpiexec + resume = uninterrupted")

    # 3. The lock follows the file: a run through a symlink to a catalogue in use is refused.
    out = os.path.join(tmp, "locked.h5")
    link_dir = os.path.join(tmp, "elsewhere")
    os.mkdir(link_dir)
    link = os.path.join(link_dir, "alias.h5")
    proc = subprocess.Popen(command(["run", longer, "-o", out]), stderr=subprocess.PIPE, text=True)
    check(wait_done(out, 1, proc), "first run got going")
    os.symlink(out, link)
    p = spinflip("run", longer, "-o", link)
    check(p.returncode == 2 and one_error_line(p.stderr) and "in use by another spinflip run" in p.stderr,
          f"second run through a symlink refused ({p.returncode}: {p.stderr[-600:]})")
    proc.send_signal(signal.SIGINT)
    proc.communicate(timeout=120)
    consistent(out, "catalogue of the first run")

    # 4. A full disk while entries are written.
    out = os.path.join(tmp, "full.h5")
    p = spinflip("run", longer, "-o", out, "--max-entries", "2")
    check(p.returncode == 0, f"catalogue made with two entries ({p.stderr[-400:]})")
    limit = os.path.getsize(out) // 2
    p = subprocess.run(command(["run", longer, "-o", out]), capture_output=True, text=True, timeout=300,
                       preexec_fn=size_limit(limit), env=LIMITED_ENV)
    check(p.returncode == 2 and one_error_line(p.stderr) and "file system refused a write" in p.stderr
          and "resumable" in p.stderr, f"full disk: exit 2 with one clear line ({p.returncode}: {p.stderr[-1200:]})")
    check((progress(out) or {}).get("state") == "error", f"full disk: progress says error ({progress(out)})")
    done, total = consistent(out, "full disk")
    check(done < total, f"full disk: entries left pending ({done} of {total} done)")
    p = spinflip("run", longer, "-o", out)
    check(p.returncode == 0 and "finished" in p.stderr, f"resume after the full disk ({p.stderr[-600:]})")
    diff = compare(ref, out)
    check(not diff, f"full disk + resume = uninterrupted: {diff}")

    # 5. A catalogue that cannot fit is refused before anything is written.
    out = os.path.join(tmp, "nofit.h5")
    p = subprocess.run(command(["run", longer, "-o", out]), capture_output=True, text=True, timeout=300,
                       preexec_fn=size_limit(limit // 4), env=LIMITED_ENV)
    check(p.returncode == 2 and one_error_line(p.stderr) and "ulimit -f" in p.stderr,
          f"too small a file size limit: refused ({p.returncode}: {p.stderr[-600:]})")
    check(not [f for f in os.listdir(tmp) if f.startswith("nofit.h5") and not f.endswith(".lock")],
          f"nothing written for the refused catalogue ({sorted(os.listdir(tmp))})")

check.finish()
