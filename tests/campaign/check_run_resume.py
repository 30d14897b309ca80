"""Resume (DESIGN.md §9): a run stopped any way — --max-entries, SIGUSR1 to
mpiexec (the scheduler's warning), SIGTERM, or kill -9 of one rank at random
moments — and then run again gives the same catalogue as an uninterrupted run,
compared dataset by dataset with h5py (DESIGN.md §10). A second run on a
catalogue in use is refused. Every interrupted file must open and hold data
for every entry marked done."""
import fcntl
import json
import os
import random
import signal
import subprocess
import sys
import tempfile
import time

import h5py
import numpy as np

sys.path.insert(0, os.path.dirname(__file__))
from catalogue_compare import compare  # noqa: E402
from run_support import DATA, TINY, Checks, command, spinflip  # noqa: E402

check = Checks()
SMALL = os.path.join(DATA, "small.toml")


def children(pid):
    out = []
    for d in os.listdir("/proc"):
        if d.isdigit():
            try:
                with open(f"/proc/{d}/stat") as f:
                    fields = f.read().rsplit(")", 1)[1].split()
                if int(fields[1]) == pid:
                    out.append(int(d))
            except OSError:
                pass
    return out


def progress(path):
    try:
        return json.load(open(path + ".progress.json"))
    except (OSError, ValueError):
        return None


def wait_done(path, n, proc, limit=120):
    """Wait until the progress file shows n entries done (or the run ends)."""
    t0 = time.time()
    while time.time() - t0 < limit and proc.poll() is None:
        p = progress(path)
        if p and p["state"] == "running" and p["done"] >= n:
            return True
        time.sleep(0.05)
    return False


def consistent(path, what):
    """The interrupted file opens; every done entry has its rows; pending ones are
    either untouched (NaN) or partly written — never marked done without data."""
    with h5py.File(path, "r") as f:
        st = f["entries/status"][()]
        ok = set(np.unique(st)) <= {0, 1}
        for scen in f["stats"].attrs["scenarios"]:
            for kern in f["stats"][scen].attrs["kernels"]:
                v = f["stats"][scen][kern]["values"][()]
                ok &= not np.isnan(v[st == 1]).all(axis=(1, 2)).any()
        ok &= not np.isnan(f["cones/history/x_hi"][()][st == 1]).any()
        check(ok, f"{what}: interrupted catalogue opens and its done entries have data")
        return int((st == 1).sum())


with tempfile.TemporaryDirectory() as tmp:
    ref = os.path.join(tmp, "ref.h5")
    p = spinflip("run", SMALL, "-o", ref, ranks=2)
    check(p.returncode == 0, f"reference run ({p.stderr[-1500:]})")

    # 1. --max-entries: a clean partial run, then resume with another rank count.
    part = os.path.join(tmp, "part.h5")
    p = spinflip("run", SMALL, "-o", part, "--max-entries", "5")
    check(p.returncode == 0 and "stopped early after --max-entries" in p.stderr, f"max-entries stop ({p.stderr[-800:]})")
    check(spinflip("status", part, "--require-complete").returncode == 3, "status exits 3 while pending")
    check(progress(part)["state"] == "stopped" and progress(part)["done"] == 5, f"progress file: {progress(part)}")
    p = spinflip("run", SMALL, "-o", part, ranks=2)
    check(p.returncode == 0 and "(5 done, 0 failed, 15 to run)" in p.stderr, f"resume takes the rest ({p.stderr[:800]})")
    diff = compare(ref, part)
    check(not diff, f"max-entries + resume = uninterrupted: {diff}")

    # 2. A catalogue whose lock another process holds (as a running spinflip
    #    run does, with flock on <catalogue>.lock) is refused, and left as it was.
    with open(ref + ".lock", "a") as lock:
        fcntl.flock(lock, fcntl.LOCK_EX | fcntl.LOCK_NB)
        p = spinflip("run", SMALL, "-o", ref)
        check(p.returncode == 2 and "in use by another spinflip run" in p.stderr, f"locked catalogue refused ({p.stderr})")
    check(not compare(ref, part), "refused catalogue unchanged")

    # 3. SIGUSR1 to mpiexec: every rank finishes its entry, exit 3, resumable.
    #    jobs/tiny with more realisations and a short progress interval, so the
    #    signal surely lands while entries remain.
    longer = os.path.join(tmp, "longer.toml")
    text = open(TINY).read().replace("progress_interval_s = 2", "progress_interval_s = 0.2")
    text = text.replace('kind = "fiducial"\nrealisations = 12', 'kind = "fiducial"\nrealisations = 40')
    check("realisations = 40" in text and "progress_interval_s = 0.2" in text, "longer tiny campaign made")
    open(longer, "w").write(text)
    usr = os.path.join(tmp, "usr1.h5")
    proc = subprocess.Popen(command(["run", longer, "-o", usr], ranks=2), stderr=subprocess.PIPE, text=True)
    started = wait_done(usr, 1, proc)
    check(started, "longer tiny run got going")
    proc.send_signal(signal.SIGUSR1)
    _, err = proc.communicate(timeout=120)
    check(proc.returncode == 3 and "stopped early on SIGUSR1" in err and "resumable" in err,
          f"SIGUSR1: exit 3, says it stopped and is resumable ({proc.returncode}: {err[-1500:]})")
    n_done = consistent(usr, "SIGUSR1")
    check(0 < n_done < 54, f"SIGUSR1 stopped the run part way ({n_done} of 54 done)")
    check(spinflip("status", usr, "--require-complete").returncode == 3, "status exits 3 after SIGUSR1")
    p = spinflip("run", longer, "-o", usr)
    check(p.returncode == 0 and "finished" in p.stderr, f"resume after SIGUSR1 ({p.stderr[-800:]})")
    tiny_ref = os.path.join(tmp, "tiny_ref.h5")
    p = spinflip("run", longer, "-o", tiny_ref, ranks=2)
    diff = compare(tiny_ref, usr)
    check(not diff, f"SIGUSR1 + resume = uninterrupted: {diff}")

    # 4. SIGTERM to a single-process run: abandons the entry in progress, exit 3.
    term = os.path.join(tmp, "term.h5")
    proc = subprocess.Popen(command(["run", SMALL, "-o", term]), stderr=subprocess.PIPE, text=True)
    wait_done(term, 3, proc)
    proc.send_signal(signal.SIGTERM)
    _, err = proc.communicate(timeout=120)
    check(proc.returncode == 3 and "stopped early on SIGTERM" in err, f"SIGTERM: exit 3 ({proc.returncode}: {err[-800:]})")
    consistent(term, "SIGTERM")

    # 5. kill -9 of one rank at random moments, ten times over, then a last run:
    #    jobs/tiny with 300 fiducial realisations (314 entries, enough work for
    #    ten kills), each kill landing a random 0-1 s after that run's first
    #    entries are done.
    many = os.path.join(tmp, "many.toml")
    text = open(TINY).read().replace("progress_interval_s = 2", "progress_interval_s = 0.1")
    text = text.replace('kind = "fiducial"\nrealisations = 12', 'kind = "fiducial"\nrealisations = 300')
    check("realisations = 300" in text, "kill campaign made")
    open(many, "w").write(text)
    many_ref = os.path.join(tmp, "many_ref.h5")
    p = spinflip("run", many, "-o", many_ref, ranks=2)
    check(p.returncode == 0, f"kill campaign reference run ({p.stderr[-800:]})")
    rng = random.Random(20261202)
    killed = os.path.join(tmp, "killed.h5")
    kills = 0
    for i in range(10):
        if os.path.exists(killed + ".progress.json"):
            os.remove(killed + ".progress.json")
        proc = subprocess.Popen(command(["run", many, "-o", killed], ranks=2), stdout=subprocess.DEVNULL,
                                stderr=subprocess.PIPE, text=True)
        got_going = wait_done(killed, 1, proc)
        time.sleep(rng.uniform(0.0, 1.0))
        ranks = children(proc.pid)
        print(f"kill {i}: run going {got_going}, alive {proc.poll() is None}, ranks {ranks}", flush=True)
        if ranks and proc.poll() is None:
            victim = rng.choice(ranks)
            try:
                os.kill(victim, signal.SIGKILL)
                kills += 1
            except ProcessLookupError:
                pass
        try:
            proc.communicate(timeout=120)
        except subprocess.TimeoutExpired:
            proc.kill()
            proc.communicate()
        if os.path.exists(killed):
            consistent(killed, f"kill {i}")
    check(kills >= 8, f"at least 8 of 10 kills hit a running rank ({kills})")
    p = spinflip("run", many, "-o", killed, ranks=2)
    check(p.returncode == 0 and "finished" in p.stderr, f"final resume after kills ({p.stderr[-800:]})")
    diff = compare(many_ref, killed)
    check(not diff, f"{kills} kill -9 + resume = uninterrupted: {diff}")
    print(f"{kills} kills hit a running rank", flush=True)

check.finish()
