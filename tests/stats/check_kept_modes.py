"""Observed modes (DESIGN.md §5, docs/stats.md): on a wedge-cut cone, the power
spectrum of `spinflip run` averages the modes the instrument kept only. Reference:
numpy.fft.fftn of each chunk of the observed cone that `spinflip cone` writes; the
kept modes are those the instrument did not zero (|F| far above float rounding),
binned with the DESIGN.md §6 formulas. n_modes is lower than the clean cone's count
exactly in the bins the wedge crosses, equal elsewhere; a bin wholly inside the
wedge is NaN with n_modes 0; P equals numpy's mean over the same modes."""
import os
import subprocess
import tempfile
import tomllib

import h5py
import numpy as np

from common import check, finish

SPINFLIP = os.environ["SPINFLIP"]
SOURCE = os.environ["SPINFLIP_SOURCE_DIR"]
with open(os.path.join(SOURCE, "jobs", "tiny", "campaign.toml"), "rb") as fh:
    tiny = tomllib.load(fh)


def table(name, t):
    val = lambda v: "true" if v is True else "false" if v is False else f'"{v}"' if isinstance(v, str) else repr(v)
    return f"[{name}]\n" + "".join(f"{k} = {val(v)}\n" for k, v in t.items())


text = table("campaign", {"name": "kept", "seed": 3, "output": "k.h5"}) + table("cone", tiny["cone"])
text += table("sources", tiny["sources"])
for name, p in tiny["parameters"].items():
    text += table(f"parameters.{name}", p)
text += '[[designs]]\nkind = "fiducial"\nrealisations = 1\n'
text += table("scenarios.wedge", {"array": "none", "wedge": True, "wedge_buffer_per_mpc": 0.05})
text += table("chunks", tiny["chunks"])
# Linear bins from 0 (DESIGN.md §6 allows k_min = 0 for linear bins; k = 0 stays out).
edges = np.linspace(0.0, 1.2, 9)
text += table("stats.power", {"bins": 8, "k_min_mpc": 0.0, "k_max_mpc": 1.2, "log_bins": False})

d = tempfile.mkdtemp(prefix="spinflip-kept-")
path = os.path.join(d, "c.toml")
with open(path, "w") as fh:
    fh.write(text)
env = dict(os.environ, OMPI_ALLOW_RUN_AS_ROOT="1", OMPI_ALLOW_RUN_AS_ROOT_CONFIRM="1")
for args in (["run", path, "-o", os.path.join(d, "k.h5")],
             ["cone", path, "--point", "0", "--realisation", "0", "--scenario", "wedge", "-o", os.path.join(d, "c.h5")]):
    p = subprocess.run([SPINFLIP, *args], capture_output=True, text=True, env=env, timeout=300)
    check(p.returncode == 0, f"spinflip {args[0]} exits 0: {p.stderr[-500:]}")

with h5py.File(os.path.join(d, "k.h5")) as f, h5py.File(os.path.join(d, "c.h5")) as c:
    g = f["stats/wedge/power"]
    vals, by_unit, axis = g["values"][0], g["n_modes_by_unit"][()], g["n_modes"][()]
    ufreq = g["unit_freq_MHz"][()]
    cone = c["observed/wedge"][()].astype(np.float64)
    freq = c["freq_MHz"][()]
    cell = float(tiny["cone"]["cell_mpc"])
    L = cone.shape[2]
    # The chunk length: the one whose chunk centres are the catalogue's unit frequencies.
    C = next(n for n in range(2, L + 1) if L // n == len(ufreq) and
             np.allclose([freq[u * n + n // 2] for u in range(len(ufreq))], ufreq))
    crossed = untouched = empty = 0
    for u in range(len(ufreq)):
        x = cone[:, :, u * C:(u + 1) * C]
        F = np.fft.fftn(x)
        ks = np.meshgrid(*[2 * np.pi * np.fft.fftfreq(n, d=cell) for n in x.shape], indexing="ij")
        k = np.sqrt(sum(kk ** 2 for kk in ks))
        a = np.abs(F)
        kept = a > 1e-4 * np.median(a[a > 1e-3 * a.max()])  # zeroed modes sit at float rounding, ~1e-7
        p = cell ** 3 * a ** 2 / x.size
        for b, (lo, hi) in enumerate(zip(edges[:-1], edges[1:])):
            inbin = (k >= lo) & (k < hi) & (k > 0)
            n_kept, n_clean = (inbin & kept).sum(), inbin.sum()
            check(by_unit[u, b] == n_kept, f"chunk {u} bin {b}: n_modes {by_unit[u, b]} == numpy's kept count {n_kept}")
            if n_kept < n_clean:
                crossed += 1
            else:
                untouched += 1
            if n_kept == 0:
                empty += 1
                check(np.isnan(vals[u, b]), f"chunk {u} bin {b}: no kept mode gives NaN")
            else:
                ref = p[inbin & kept].mean()
                # float32 cone, float spectrum: 1e-5 relative
                check(abs(vals[u, b] - ref) <= 1e-5 * ref, f"chunk {u} bin {b}: P {vals[u, b]:.6g} == numpy {ref:.6g}")
    check(crossed > 0 and empty > 0, f"the wedge crosses bins ({crossed}) and empties some ({empty})")
    # (every spherical bin below π/Δ holds k⊥ = 0 modes, which no interferometer keeps, so "equal
    # elsewhere" is checked on cylindrical bins in tests/instrument, KeptModes.WedgeCutChunkCountsAndMeans)
    check((axis == by_unit[:, :8].min(axis=0)[list(range(8)) * 2]).all() if by_unit.shape[1] == 16 else False,
          "the n_modes axis is the fewest over the units")
finish()
