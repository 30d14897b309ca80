"""The campaign's design generators against scipy.stats.qmc (general-purpose
reference library). Run by ctest with campaign_design_dump's path as argument;
with --with-cli (every module built) also checks `spinflip plan --points-csv`
on the tiny campaign's physical values."""
import os
import subprocess
import sys
import tempfile

import numpy as np
from scipy.stats import qmc

dump = sys.argv[1]
failures = []


def ours(kind, n, d, scramble, seed):
    out = subprocess.run([dump, kind, str(n), str(d), "1" if scramble else "0", str(seed)],
                         check=True, capture_output=True, text=True).stdout
    return np.loadtxt(out.splitlines(), ndmin=2)


# 1. Unscrambled Sobol equals scipy's exactly: both use the Joe & Kuo (2008)
#    new-joe-kuo-6.21201 direction numbers in Gray-code order. Dyadic rationals,
#    so equality is exact (no tolerance).
for d in (1, 2, 3, 7, 13, 21):
    m = 10
    ref = qmc.Sobol(d, scramble=False).random_base2(m)
    got = ours("sobol", 2**m, d, False, 1)
    if got.shape != ref.shape or not np.array_equal(got, ref):
        bad = np.argwhere(got != ref)[:3] if got.shape == ref.shape else "shape"
        failures.append(f"unscrambled sobol d={d}: differs from scipy at {bad}")

# 2. Scrambled Sobol discrepancy comparable to scipy's scrambled Sobol (LMS +
#    digital shift), same n and d: our median centred L2 discrepancy
#    (qmc.discrepancy, method CD, Hickernell 1998) within a factor 1.5 of scipy's
#    median over the same number of seeds (the factor covers seed-to-seed scatter).
for n, d in ((256, 4), (1024, 8), (128, 12)):
    seeds = range(1, 8)
    mine = np.median([qmc.discrepancy(ours("sobol", n, d, True, s)) for s in seeds])
    theirs = np.median([qmc.discrepancy(qmc.Sobol(d, scramble=True, seed=s).random(n)) for s in seeds])
    if not mine < 1.5 * theirs:
        failures.append(f"scrambled sobol n={n} d={d}: CD discrepancy {mine:.3g} vs scipy {theirs:.3g}")
    # And far better than plain random points, which a broken scramble would resemble.
    rnd = np.median([qmc.discrepancy(np.random.default_rng(s).random((n, d))) for s in seeds])
    if not mine < 0.5 * rnd:
        failures.append(f"scrambled sobol n={n} d={d}: CD {mine:.3g} not well below random {rnd:.3g}")

# 3. Latin hypercube: one point per stratum per dimension (McKay et al. 1979), and a
#    discrepancy comparable to scipy's LatinHypercube for the same n, d.
for n, d in ((50, 6), (200, 3)):
    for seed in (1, 2, 3):
        x = ours("lhs", n, d, True, seed)
        for j in range(d):
            if sorted(np.floor(x[:, j] * n).astype(int)) != list(range(n)):
                failures.append(f"lhs n={n} d={d} seed={seed}: dimension {j} not one point per stratum")
    mine = np.median([qmc.discrepancy(ours("lhs", n, d, True, s)) for s in range(1, 8)])
    theirs = np.median([qmc.discrepancy(qmc.LatinHypercube(d, seed=s).random(n)) for s in range(1, 8)])
    if not mine < 1.5 * theirs:
        failures.append(f"lhs n={n} d={d}: CD discrepancy {mine:.3g} vs scipy {theirs:.3g}")
# Centred LHS (scramble = false) puts points at stratum midpoints, as scipy's does.
x = ours("lhs", 20, 3, False, 1)
ref = qmc.LatinHypercube(3, scramble=False, seed=1).random(20)
if not np.array_equal(np.sort(x, axis=0), np.sort(ref, axis=0)):
    failures.append("centred lhs: sorted coordinates differ from scipy's stratum centres")

# 4. Through the CLI: the tiny campaign's training points are a Latin hypercube of
#    the parameter ranges (in log10 where a parameter is log).
cli = os.environ.get("SPINFLIP")
src = os.environ.get("SPINFLIP_SOURCE_DIR", ".")
tiny = os.path.join(src, "jobs", "tiny", "campaign.toml")
if "--with-cli" in sys.argv[2:]:
    import tomllib
    with open(tiny, "rb") as f:
        spec = tomllib.load(f)
    with tempfile.TemporaryDirectory() as tmp:
        csv = os.path.join(tmp, "points.csv")
        r = subprocess.run([cli, "plan", tiny, "--points-csv", csv], capture_output=True, text=True)
        if r.returncode != 0:
            failures.append(f"spinflip plan tiny: exit {r.returncode}: {r.stderr.strip()}")
        else:
            rows = np.genfromtxt(csv, delimiter=",", names=True, dtype=None, encoding="utf-8")
            train = rows[rows["role"] == "training"]
            designs = [d for d in spec["designs"] if d["kind"] == "latin_hypercube"]
            n = designs[0]["points"] if designs else 0
            checked = 0
            for name, p in spec.get("parameters", {}).items():
                v = np.asarray(train[name], dtype=float)[:n]
                lo, hi = p["min"], p["max"]
                u = (np.log10(v) - np.log10(lo)) / (np.log10(hi) - np.log10(lo)) if p.get("log") else (v - lo) / (hi - lo)
                strata = np.floor(np.clip(u, 0, 1 - 1e-12) * n).astype(int)
                if n and sorted(strata) != list(range(n)):
                    failures.append(f"plan --points-csv: {name} is not one point per stratum: {sorted(strata)}")
                checked += 1
            if checked == 0:
                failures.append("plan --points-csv: the tiny campaign has no latin_hypercube parameters to check")
            print(f"checked {checked} parameters of {n} tiny-campaign points through spinflip plan")

if failures:
    print("\n".join(failures))
    sys.exit(1)
print("designs agree with scipy.stats.qmc")
