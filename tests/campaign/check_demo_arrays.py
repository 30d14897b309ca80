"""The demo's invented arrays against a fact of the trade (common practice): with
1000 h, an array of the next-generation sensitivity class images the neutral and
ionized regions at z ≈ 8 (the slice power's signal-to-noise exceeds 1 at
k⊥ ≈ 0.1–0.3 /Mpc), while one of today's class does not. The scenarios are read
from jobs/demo/campaign.toml as they stand and run on a small cone at z ≈ 8.
Signal = the noise-bias-free cross-power of two noise realisations (cross_power);
noise = the auto-power minus that cross-power, both averaged over slices and realisations."""
import os
import tempfile
import tomllib

import h5py
import numpy as np

from run_support import SOURCE, Checks, spinflip

check = Checks()
with open(os.path.join(SOURCE, "jobs", "demo", "campaign.toml"), "rb") as fh:
    demo = tomllib.load(fh)


def toml_table(name, table):
    lines = [f"[{name}]"]
    for k, v in table.items():
        lines.append(f"{k} = " + ("true" if v is True else "false" if v is False else
                                  f'"{v}"' if isinstance(v, str) else repr(v)))
    return "\n".join(lines) + "\n"


text = toml_table("campaign", {"name": "demo_arrays", "seed": 5, "output": "a.h5"})
# The demo's transverse grid (its uv cells and k⊥), a short stretch of line of sight at z ≈ 8.
cone = dict(demo["cone"], n_los=48, z_min=7.9, z_max=8.15)
text += toml_table("cone", cone) + toml_table("sources", demo["sources"])
for name, p in demo["parameters"].items():
    text += toml_table(f"parameters.{name}", p)
text += '[[designs]]\nkind = "fiducial"\nrealisations = 2\n'
for name in ("nextgen_1000h", "current_1000h_wedge"):
    s = dict(demo["scenarios"][name], wedge=False)  # images: the wedge is not part of this fact
    text += toml_table(f"scenarios.{name}", s)
    text += toml_table(f"scenarios.{name}_auto", dict(s, cross_power=False))
text += toml_table("slices", {"cadence_MHz": 2 * demo["slices"]["width_MHz"], "width_MHz": demo["slices"]["width_MHz"]}) + toml_table("chunks", {"bandwidth_MHz": 2.0})
text += toml_table("stats.slice_power", {"bins": 10, "k_min_mpc": 0.05, "k_max_mpc": 1.0, "log_bins": True})

d = tempfile.mkdtemp(prefix="spinflip-demo-arrays-")
path = os.path.join(d, "c.toml")
with open(path, "w") as fh:
    fh.write(text)
p = spinflip("run", path, "-o", os.path.join(d, "a.h5"), ranks=1, timeout=600)
check(p.returncode == 0, f"run exits 0: {p.stderr[-800:]}")
with h5py.File(os.path.join(d, "a.h5")) as f:
    def power(name):
        g = f[f"stats/{name}/slice_power"]
        q = g["quantity"][()] == 0
        return g["values"][()][:, :, q], g["k_mean"][()][q], g["unit_z"][()]

    for name, images in (("nextgen_1000h", True), ("current_1000h_wedge", False)):
        cross, k, z = power(name)
        auto, _, _ = power(name + "_auto")
        check(abs(np.mean(z) - 8.0) < 0.15, f"slices at z ≈ 8 (mean {np.mean(z):.2f})")
        sig = np.nanmean(cross, axis=(0, 1))
        noise = np.nanmean(auto, axis=(0, 1)) - sig
        band = (k >= 0.1) & (k <= 0.3)
        snr = sig[band] / noise[band]
        print(name, "k", np.round(k[band], 3), "S/N", np.round(snr, 2))
        check(band.sum() >= 2, f"{name}: at least two bins in k⊥ 0.1–0.3 /Mpc")
        if images:
            check((snr > 1).all(), f"{name}: slice-power S/N > 1 at k⊥ 0.1–0.3 /Mpc: {snr}")
        else:
            check((snr < 1).all(), f"{name}: today's class does not image at 1000 h: S/N {snr} < 1")
check.finish()
