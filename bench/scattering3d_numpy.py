"""Speed-up of [stats.scattering3d] over the independent numpy float64 implementation of the definition
(tests/stats/scattering3d_reference.py), on the benchmark's chunk: 128 x 128 x 64, J = 4, M = 3, in the
same run. Times `spinflip measure` on the chunk (process start and file I/O included: they are a small
part) and the numpy reference, each the best of `repeats` runs, and prints both and their ratio.
    /usr/bin/python3 bench/scattering3d_numpy.py [build/src/cli/spinflip] [repeats]"""
import os
import subprocess
import sys
import tempfile
import time

import numpy as np

here = os.path.dirname(os.path.abspath(__file__))
sys.path.insert(0, os.path.join(here, "..", "tests", "stats"))
from scattering3d_reference import reference  # noqa: E402

spinflip = sys.argv[1] if len(sys.argv) > 1 else os.path.join(here, "..", "build", "src", "cli", "spinflip")
repeats = int(sys.argv[2]) if len(sys.argv) > 2 else 3
x = np.exp(np.random.default_rng(22).standard_normal((128, 128, 64))).astype(np.float32)
d = tempfile.mkdtemp()
np.save(os.path.join(d, "x.npy"), x)
best = {}
for crop in ("true", "false"):
    with open(os.path.join(d, "s.toml"), "w") as f:
        f.write(f"[stats.scattering3d]\ncrop = {crop}\n")
    t = []
    for _ in range(repeats):
        t0 = time.perf_counter()
        subprocess.run([spinflip, "-q", "measure", os.path.join(d, "x.npy"), "--stats", os.path.join(d, "s.toml"),
                        "-o", os.path.join(d, "o.h5")], check=True)
        t.append(time.perf_counter() - t0)
    best[crop] = min(t)
t = []
for _ in range(repeats):
    t0 = time.perf_counter()
    reference(x, 4, 3)
    t.append(time.perf_counter() - t0)
best["numpy"] = min(t)
print(f"spinflip measure, crop = true : {best['true']:.3f} s")
print(f"spinflip measure, crop = false: {best['false']:.3f} s")
print(f"numpy float64 reference       : {best['numpy']:.3f} s")
print(f"speed-up over numpy: cropped {best['numpy'] / best['true']:.1f}x, full resolution {best['numpy'] / best['false']:.1f}x")
