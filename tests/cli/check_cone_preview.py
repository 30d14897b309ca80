"""`spinflip cone --preview` on the tiny campaign: the cone file holds the clean
and observed cones with their axes and the uv coverage, and the picture is a PNG.
The frequency axis is checked against ν = 1420.405751768 MHz / (1+z) (standard
constant) and the PNG signature against the PNG specification (ISO/IEC 15948)."""
import os
import subprocess
import sys
import tempfile

import h5py
import numpy as np

exe = os.environ["SPINFLIP"]
campaign = os.path.join(os.environ["SPINFLIP_SOURCE_DIR"], "jobs", "tiny", "campaign.toml")
with tempfile.TemporaryDirectory() as tmp:
    cone, png = os.path.join(tmp, "cone.h5"), os.path.join(tmp, "cone.png")
    subprocess.run([exe, "cone", campaign, "--point", "0", "--scenario", "noisy", "-o", cone, "--preview", png],
                   check=True)
    with h5py.File(cone, "r") as f:
        tb = f["delta_tb_mK"][()]
        z, freq = f["z"][()], f["freq_MHz"][()]
        assert tb.shape == (32, 32, 128), tb.shape
        assert np.allclose(freq, 1420.405751768 / (1 + z), rtol=1e-12)
        assert f["observed/noisy"].shape == tb.shape
        uv = f["uv/noisy"][()]
        assert uv.shape == (32, 32) and (uv > 0).any() and (uv == 0).any(), "uv coverage should be partial"
        # Hermitian: a visibility and its conjugate are the same measurement (common practice).
        assert np.array_equal(uv, np.roll(uv[::-1, ::-1], 1, axis=(0, 1)))
        # What the preview's title names: the point's role and the campaign's labels.
        assert f.attrs["role"] == "training", f.attrs["role"]
        assert list(f.attrs["param_labels"]) == ["ζ", "T_vir,min [K]"], list(f.attrs["param_labels"])
        x_hi = f["history/x_hi"][()]
    with open(png, "rb") as p:
        assert p.read(8) == b"\x89PNG\r\n\x1a\n", "preview is not a PNG"
    assert os.path.getsize(png) > 20000
# The slice shown sits at the cone's mid-reionization: the LOS cell whose mean x_HI is nearest 0.5.
sys.path.insert(0, os.path.join(os.environ["SPINFLIP_SOURCE_DIR"], "python", "plots"))
import plot_cone  # noqa: E402

i, why = plot_cone.mid_reionization(z, x_hi)
if x_hi.min() < 0.5 < x_hi.max():
    assert i == int(np.argmin(np.abs(x_hi - 0.5))) and why == "mid-reionization", (i, why)
i, why = plot_cone.mid_reionization(z, np.ones_like(z))  # never crosses 0.5: the middle of the band
assert i == len(z) // 2 and why == "middle of the band"
assert plot_cone.param_text("T_vir,min [K]", 2e4) == "T_vir,min = 2×10⁴ K"
assert plot_cone.colour_scale(np.array([-1.0, 3.0]))["cmap"] == "RdBu_r"  # signed: diverging, centred on 0
s = plot_cone.colour_scale(np.array([-1.0, 3.0]))
assert s["vmin"] == -s["vmax"]
print("cone preview ok")
