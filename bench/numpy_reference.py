"""CPU seconds of the tests' float64 numpy implementation of a kernel's definition,
for the benchmarks' speed-up lines (bench_stats). The functions are taken from the
test scripts themselves (tests/stats/check_*.py), not copied, so the bench times
exactly the reference the tests check against.
  numpy_reference.py scattering N J L REPS   -> fastest CPU seconds of reference() on an N×N image
  numpy_reference.py power N0 N1 N2 REPS     -> fastest CPU seconds of reference_spherical() (12 log bins)"""
import ast
import os
import sys
import time

import numpy as np

HERE = os.path.dirname(os.path.abspath(__file__))


def functions(script, names):
    path = os.path.join(HERE, "..", "tests", "stats", script)
    tree = ast.parse(open(path).read(), path)
    body = [n for n in tree.body if isinstance(n, ast.FunctionDef) and n.name in names]
    ns = {"np": np}
    exec(compile(ast.Module(body=body, type_ignores=[]), path, "exec"), ns)
    return ns


def fastest(f, reps):
    best = None
    for _ in range(reps):
        t0 = time.process_time()
        f()
        t = time.process_time() - t0
        best = t if best is None else min(best, t)
    return best


kind = sys.argv[1]
rng = np.random.default_rng(3)
if kind == "scattering":
    n, J, L, reps = (int(a) for a in sys.argv[2:6])
    ns = functions("check_scattering.py", {"psi_hat", "reference"})
    x = np.exp(rng.standard_normal((n, n)))  # lognormal, as bench_stats' slice
    print(f"{fastest(lambda: ns['reference'](x, J, L), reps):.6f}")
elif kind == "power":
    n0, n1, n2, reps = (int(a) for a in sys.argv[2:6])
    ns = functions("check_power.py", {"kgrid", "reference_spherical"})
    x = np.exp(rng.standard_normal((n0, n1, n2))).astype(np.float32)
    edges = np.geomspace(0.05, 2.0, 13)  # [stats.power] bins = 12 defaults (DESIGN.md §6)
    print(f"{fastest(lambda: ns['reference_spherical'](x, 1.5, edges), reps):.6f}")
else:
    sys.exit(f"numpy_reference.py: unknown kernel {kind!r} (scattering, power)")
