"""Helpers shared by the stats checks: run `spinflip measure` and read its output with h5py."""
import os
import subprocess
import sys
import tempfile

import h5py
import numpy as np

SPINFLIP = os.environ.get("SPINFLIP", "spinflip")
FAILURES = []


def workdir():
    return tempfile.mkdtemp(prefix="spinflip-stats-")


def measure(array, stats_text, cell_mpc=None, name="input.npy", extra=()):
    """Write `array` (numpy) to .npy, run measure, return {kernel: {dataset: array, attrs: dict}}."""
    d = workdir()
    src = os.path.join(d, name)
    np.save(src, array)
    toml = os.path.join(d, "stats.toml")
    with open(toml, "w") as f:
        f.write(stats_text)
    out = os.path.join(d, "out.h5")
    cmd = [SPINFLIP, "-q", "measure", src, "--stats", toml, "-o", out, *extra]
    if cell_mpc is not None:
        cmd += ["--cell-mpc", str(cell_mpc)]
    r = subprocess.run(cmd, capture_output=True, text=True)
    if r.returncode != 0:
        sys.exit(f"measure failed ({r.returncode}): {r.stderr}")
    result = {}
    with h5py.File(out, "r") as h:
        for g in h:
            result[g] = {k: h[g][k][()] for k in h[g]}
            result[g]["attrs"] = dict(h[g].attrs)
    return result


def check(ok, message):
    print(("ok   " if ok else "FAIL ") + message)
    if not ok:
        FAILURES.append(message)


def close(got, ref, rel=1e-4, floor=1e-6, what=""):
    """|c - c_ref| <= rel |c_ref| + floor max|c_ref| elementwise (DESIGN.md §6 tolerance form)."""
    got, ref = np.asarray(got, float), np.asarray(ref, float)
    scale = np.nanmax(np.abs(ref)) if ref.size else 0.0
    bad = ~(np.abs(got - ref) <= rel * np.abs(ref) + floor * scale)
    bad &= ~(np.isnan(got) & np.isnan(ref))
    worst = np.nanmax(np.abs(got - ref) / np.maximum(np.abs(ref), 1e-300)) if ref.size else 0.0
    allowed = rel * np.abs(ref) + floor * scale
    used = np.nanmax(np.abs(got - ref) / np.where(allowed > 0, allowed, np.inf)) if ref.size else 0.0
    check(not bad.any(), f"{what}: {bad.sum()} of {ref.size} outside tolerance (worst rel {worst:.2e}, "
                         f"{used:.2f} of the tolerance)")


def finish():
    if FAILURES:
        sys.exit(f"{len(FAILURES)} check(s) failed")
    print("all checks passed")
