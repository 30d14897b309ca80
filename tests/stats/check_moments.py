"""One-point moments against scipy.stats (skew with bias=True, kurtosis with
fisher=True, bias=True: EXCESS kurtosis of the biased estimators) and
numpy.histogram, per slice of a cube and on a whole chunk."""
import numpy as np
import scipy.stats

from common import check, close, finish, measure

rng = np.random.default_rng(5)
cube = np.exp(rng.standard_normal((30, 20, 7))).astype(np.float32)  # lognormal: skewed, heavy tail
edges = [0.0, 0.5, 1.0, 2.0, 5.0]
res = measure(cube, f"""[stats.moments]
histogram_edges = {edges}
[stats.chunk_moments]
""")
m = res["moments"]
check(m["values"].shape == (7, 8), f"moments values shape {m['values'].shape} == (7 slices, 4 + 4 bins)")
for s in range(7):
    x = cube[:, :, s].astype(np.float64)
    ref = [x.mean(), x.var(), scipy.stats.skew(x, axis=None), scipy.stats.kurtosis(x, axis=None, fisher=True)]
    hist = np.histogram(x, bins=edges)[0] / x.size
    close(m["values"][s, :4], ref, rel=1e-5, what=f"slice {s}: mean, variance, skew, excess kurtosis vs scipy.stats")
    close(m["values"][s, 4:], hist, rel=1e-12, what=f"slice {s}: histogram fraction vs numpy.histogram")
x = cube.astype(np.float64)
close(res["chunk_moments"]["values"][0],
      [x.mean(), x.var(), scipy.stats.skew(x, axis=None), scipy.stats.kurtosis(x, axis=None)], rel=1e-5,
      what="whole chunk moments vs scipy.stats")
check(list(m["quantity"]) == [0, 1, 2, 3, 4, 4, 4, 4], "quantity axis 0..3 then histogram bins (4)")
finish()
