#!/usr/bin/python3
"""Task-farm scaling: entries per second of `spinflip run` on 1 rank and on
2 ranks, measured in one invocation.

    /usr/bin/python3 bench/scaling.py [--campaign jobs/demo/campaign.toml]
        [--entries 40] [--rounds 3] [--spinflip build/src/cli/spinflip]

Both rank counts run the same first --entries entries of the campaign (entries
differ in cost from point to point, so different entries would bias the ratio).
A short 1-rank run first warms the page cache and is not counted. Runs then
alternate 1, 2, 1, 2, ... ranks so that a change in the machine's load hits
both rank counts alike. The rate of each run is the driver's own (its last log
line: this run's entries over the time since the task farm started, so the
one-time setup is not counted). Prints every run, then the ratio of the mean
2-rank rate to the mean 1-rank rate (issue target >= 1.9 on two idle cores) and
the load average before and after, which says whether the cores were idle.
"""
import argparse
import os
import re
import subprocess
import sys
import tempfile

here = os.path.dirname(os.path.abspath(__file__))
root = os.path.dirname(here)

ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
ap.add_argument("--campaign", default=os.path.join(root, "jobs", "demo", "campaign.toml"))
ap.add_argument("--entries", type=int, default=40)
ap.add_argument("--rounds", type=int, default=3)
ap.add_argument("--spinflip", default=os.path.join(root, "build", "src", "cli", "spinflip"))
args = ap.parse_args()
if args.entries < 2 or args.rounds < 1:
    sys.exit("scaling.py: --entries must be >= 2 and --rounds >= 1")

env = dict(os.environ, OMPI_ALLOW_RUN_AS_ROOT="1", OMPI_ALLOW_RUN_AS_ROOT_CONFIRM="1")
rate_re = re.compile(r"rank-seconds .*; ([\d.]+) entries/s")


def run(ranks, out_dir, n):
    out = os.path.join(out_dir, f"scaling-{ranks}.h5")
    for f in (out, out + ".progress.json"):
        if os.path.exists(f):
            os.remove(f)
    cmd = ["mpiexec", "-n", str(ranks), "--oversubscribe", args.spinflip, "run", args.campaign, "-o", out,
           "--group-size", "1", "--max-entries", str(n)]
    p = subprocess.run(cmd, env=env, capture_output=True, text=True)
    text = p.stdout + p.stderr
    m = rate_re.search(text)
    if p.returncode != 0 or not m:
        sys.exit(f"scaling.py: {' '.join(cmd)} exited {p.returncode}:\n{text[-2000:]}")
    return n, float(m.group(1))


def load():
    return os.getloadavg()[0]


with tempfile.TemporaryDirectory(prefix="spinflip-scaling-") as tmp:
    load_before = load()
    run(1, tmp, 2)  # warm-up, not counted
    rates = {1: [], 2: []}
    for r in range(args.rounds):
        for ranks in (1, 2):
            n, rate = run(ranks, tmp, args.entries)
            rates[ranks].append(rate)
            print(f"round {r + 1}: {ranks} rank{'s' if ranks > 1 else ''}, {n} entries: {rate:.3f} entries/s",
                  flush=True)
    load_after = load()

mean = {k: sum(v) / len(v) for k, v in rates.items()}
pairs = [b / a for a, b in zip(rates[1], rates[2])]
print(f"1 rank {mean[1]:.3f} entries/s, 2 ranks {mean[2]:.3f} entries/s: ratio {mean[2] / mean[1]:.2f} "
      f"(per round {', '.join(f'{x:.2f}' for x in pairs)}; target >= 1.9 on two idle cores); "
      f"load average {load_before:.1f} before, {load_after:.1f} after")
