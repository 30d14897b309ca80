"""Every verb that writes a file writes it whole or not at all (issue 19): the
file is made as <target>.partial beside the target and renamed when complete,
so a verb that fails half way leaves no partial file and a previous output at
the target byte for byte as it was. One check per verb: covariance, fisher,
export, measure, cone, jobscript, plan --points-csv (and ingest --cone).

Failures are made two ways: bad input found only after the output was begun
(a second --select that cannot be analysed), and a full disk, imitated with a
file size limit (RLIMIT_FSIZE, what `ulimit -f` sets) with SIGXFSZ ignored, so
a write past the limit fails with EFBIG as on a full file system (POSIX
setrlimit(2): "a process that exceeds the limit ... SIGXFSZ; if ignored, EFBIG").
"""
import os
import resource
import signal
import subprocess
import sys
import tempfile

import h5py
import numpy as np

sys.path.insert(0, os.path.join(os.environ.get("SPINFLIP_SOURCE_DIR", "."), "tests", "analysis"))
import make_catalogue  # noqa: E402

SPINFLIP = os.environ.get("SPINFLIP", "spinflip")
SRC = os.environ.get("SPINFLIP_SOURCE_DIR", ".")
TINY = os.path.join(SRC, "jobs", "tiny", "campaign.toml")
FAILURES = []


def check(cond, what):
    print(("ok   " if cond else "FAIL ") + what, flush=True)
    if not cond:
        FAILURES.append(what)


def size_limit(nbytes):
    def apply():
        signal.signal(signal.SIGXFSZ, signal.SIG_IGN)  # ignored dispositions survive exec
        resource.setrlimit(resource.RLIMIT_FSIZE, (nbytes, nbytes))
    return apply


# Under a file size limit MPI_Init itself fails when PMIx keeps its data store
# in shared-memory files (the gds/ds21 component); the in-memory store (hash)
# needs no file, so the limit falls on spinflip's own writes only.
LIMITED_ENV = dict(os.environ, PMIX_MCA_gds="hash")


def spinflip(*args, limit=None, cwd=None):
    return subprocess.run([SPINFLIP, *args], capture_output=True, text=True, cwd=cwd,
                          preexec_fn=size_limit(limit) if limit else None, env=LIMITED_ENV if limit else None)


def one_error_line(p):
    lines = [l for l in p.stderr.splitlines() if l.strip()]
    errors = [l for l in lines if l.startswith("spinflip: error:")]
    return len(errors) == 1 and "Traceback" not in p.stderr


def kept(verb, target, previous, p, expect_in=None):
    """The verb failed with one line and exit 2; the previous output is intact; no partial file."""
    check(p.returncode == 2 and one_error_line(p), f"{verb}: exit 2 with one error line ({p.returncode}: {p.stderr[-600:]!r})")
    if expect_in:
        check(expect_in in p.stderr, f"{verb}: the message says '{expect_in}' ({p.stderr.strip()[-300:]!r})")
    check(open(target, "rb").read() == previous, f"{verb}: the previous {os.path.basename(target)} is untouched")
    leftovers = [f for f in os.listdir(os.path.dirname(target)) if ".partial" in f]
    check(not leftovers, f"{verb}: no partial file left ({leftovers})")


with tempfile.TemporaryDirectory(prefix="spinflip-atomic-") as d:
    cat = os.path.join(d, "cat.h5")
    make_catalogue.make(cat, n_fid=40, n_stencil=20, n_train_points=6, n_train_real=2)
    good_sel = "name=ps;kernel=power"
    # The scattering kernel's order-0 coefficient is exactly 0 in every entry
    # (make_catalogue.py), so a log transform of that selection must be refused.
    zero_sel = "name=sc;kernel=scattering"

    # A catalogue whose fiducial entry 3 has one NaN coefficient (deep/scattering,
    # unit 1, coefficient 2): a selection holding it cannot be analysed.
    broken = os.path.join(d, "broken.h5")
    make_catalogue.make(broken, n_fid=40, n_stencil=20, n_train_points=6, n_train_real=2)
    with h5py.File(broken, "r+") as f:
        v = f["stats/deep/scattering/values"]
        row = v[3]
        row[1, 2] = np.nan
        v[3] = row
    bad_sel = "name=sc;kernel=scattering;scenario=deep"

    # covariance: a good selection is written first, the second is refused.
    out = os.path.join(d, "cov.h5")
    p = spinflip("covariance", broken, "-s", good_sel, "--no-plot", "-o", out)
    check(p.returncode == 0 and os.path.exists(out), f"covariance: a good run ({p.stderr[-300:]})")
    previous = open(out, "rb").read()
    p = spinflip("covariance", broken, "-s", good_sel, "-s", bad_sel, "--no-plot", "-o", out)
    kept("covariance", out, previous, p, "NaN in some done entries only")

    # fisher: the same.
    out = os.path.join(d, "fisher.h5")
    p = spinflip("fisher", broken, "-s", good_sel, "--no-plot", "-o", out)
    check(p.returncode == 0 and os.path.exists(out), f"fisher: a good run ({p.stderr[-300:]})")
    previous = open(out, "rb").read()
    p = spinflip("fisher", broken, "-s", good_sel, "-s", bad_sel, "--no-plot", "-o", out)
    kept("fisher", out, previous, p, "NaN in some done entries only")

    # export: the NaN is named by entry, point, realisation and coefficient.
    out = os.path.join(d, "train.h5")
    p = spinflip("export", broken, "-s", good_sel, "-o", out)
    check(p.returncode == 0 and os.path.exists(out), f"export: a good run ({p.stderr[-300:]})")
    previous = open(out, "rb").read()
    p = spinflip("export", broken, "-s", good_sel, "-s", bad_sel, "--roles", "all", "-o", out)
    kept("export", out, previous, p, "deep/scattering u1")
    check("deep/scattering u1" in p.stderr and ("because it is" in p.stderr or "NaN in some done entries only" in p.stderr),
          f"export: the message names the kernel, unit and cause ({p.stderr.strip()[-400:]!r})")
    p = spinflip("export", cat, "-s", good_sel, "-s", zero_sel, "--transform", "log", "-o", out)
    kept("export --transform log", out, previous, p, "coefficient deep/scattering")

    # measure: a full disk while the output is written.
    img = os.path.join(d, "img.npy")
    np.save(img, np.random.default_rng(19).normal(size=(32, 32)).astype(np.float32))
    stats = os.path.join(d, "stats.toml")
    open(stats, "w").write("[stats.slice_power]\nbins = 4\n[stats.scattering]\nscales = 3\norientations = 4\n")
    out = os.path.join(d, "measure.h5")
    p = spinflip("measure", img, "--stats", stats, "-o", out)
    check(p.returncode == 0, f"measure: a good run ({p.stderr[-300:]})")
    previous = open(out, "rb").read()
    p = spinflip("measure", img, "--stats", stats, "-o", out, limit=4096)
    kept("measure (full disk)", out, previous, p)

    # cone: a full disk while the cone is written; --preview into a missing folder.
    out = os.path.join(d, "cone.h5")
    open(out, "wb").write(b"a previous cone")
    previous = open(out, "rb").read()
    p = spinflip("cone", TINY, "--point", "0", "-o", out, limit=8192)
    kept("cone (full disk)", out, previous, p)
    p = spinflip("cone", TINY, "--point", "0", "-o", out, "--preview", os.path.join(d, "nonexistent", "p.png"))
    kept("cone --preview into a missing folder", out, previous, p, "--preview")

    # jobscript: -o is the script file; a full disk keeps the previous script.
    script = os.path.join(d, "tiny.slurm")
    p = spinflip("jobscript", TINY, "--walltime", "00:01:00", "-o", script, cwd=d)
    check(p.returncode == 0 and os.path.isfile(script) and os.path.isdir(os.path.join(d, "logs")),
          f"jobscript: -o names the script; logs/ beside it ({p.returncode}: {p.stderr[-300:]})")
    text = open(script).read() if os.path.exists(script) else ""
    # The default lead follows the wall time: a quarter of 60 s.
    check("--signal=B:USR1@15" in text, "jobscript: --walltime 00:01:00 gets a 15 s signal lead by default")
    previous = open(script, "rb").read()
    p = spinflip("jobscript", TINY, "--walltime", "00:10:00", "-o", script, limit=1024, cwd=d)
    kept("jobscript (full disk)", script, previous, p)

    # plan --points-csv: a full disk while the CSV is written.
    csv = os.path.join(d, "points.csv")
    open(csv, "w").write("previous\n")
    previous = open(csv, "rb").read()
    p = spinflip("plan", TINY, "--points-csv", csv, limit=64)
    kept("plan --points-csv (full disk)", csv, previous, p, "--points-csv")

if FAILURES:
    raise SystemExit(f"{len(FAILURES)} check(s) failed: {FAILURES}")
print("all checks passed")
