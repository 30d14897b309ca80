"""Shared bits of the analysis checks: run the CLI, map selection elements
back to the synthetic model's full vector."""
import os
import subprocess
import sys
import tempfile

import h5py
import numpy as np

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
import make_catalogue  # noqa: E402

SPINFLIP = os.environ.get("SPINFLIP", "spinflip")
FAILURES = []


def workdir():
    return tempfile.mkdtemp(prefix="spinflip-analysis-")


def run(*args, expect=0):
    p = subprocess.run([SPINFLIP, *args], capture_output=True, text=True)
    if p.returncode != expect:
        raise SystemExit(f"spinflip {' '.join(args)} exited {p.returncode}, expected {expect}\n"
                         f"stdout:\n{p.stdout}\nstderr:\n{p.stderr}")
    return p


def text(v):
    return v.decode() if isinstance(v, bytes) else str(v)


def model_columns(group, truth):
    """Full-model index of every element of an output's selection record."""
    s = group["selection"]
    keys = zip((text(x) for x in s["scenario"][()]), (text(x) for x in s["kernel"][()]), s["unit"][()], s["coeff"][()])
    return np.array([truth["index"][(a, b, int(u), int(c))] for a, b, u, c in keys])


def check(cond, what):
    print(("ok   " if cond else "FAIL ") + what)
    if not cond:
        FAILURES.append(what)


def finish():
    if FAILURES:
        raise SystemExit(f"{len(FAILURES)} check(s) failed: {FAILURES}")
    print("all checks passed")
