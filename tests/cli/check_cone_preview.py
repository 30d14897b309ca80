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
    with open(png, "rb") as p:
        assert p.read(8) == b"\x89PNG\r\n\x1a\n", "preview is not a PNG"
    assert os.path.getsize(png) > 20000
print("cone preview ok")
