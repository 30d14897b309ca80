#!/usr/bin/python3
"""The jobs/dawn fiducial cone: global trough and the redshift evolution of the 21-cm power.

Runs `spinflip cone jobs/dawn/campaign.toml --point 0 --realisation 0` (as a user would), reads
the file with h5py and measures Delta^2(k ~ 0.1 /Mpc) of 64-cell chunks with numpy FFTs
(DESIGN.md section 6 convention). Checks:
- the mean delta T_b has its minimum (the global absorption trough) between -250 and -50 mK at
  12 < z < 22 (from memory: the usual cosmic-dawn models put it at -100 to -200 mK near z ~ 15-18);
- Delta^2(k ~ 0.1) against z has a maximum during cosmic dawn (z > 12) and a separate maximum
  during reionization (z < 12), with a dip between them below half the smaller peak (fact of the
  trade: the large-scale power rises and falls two or three times between z ~ 6 and 20);
- bad values of the spin-temperature keys end `spinflip cone` with one line and exit status 2.
Prints the Delta^2 table (the issue's closing note).
"""
import os
import subprocess
import sys
import tempfile

import h5py
import numpy as np

exe = os.environ["SPINFLIP"]
src = os.environ["SPINFLIP_SOURCE_DIR"]
campaign = os.path.join(src, "jobs", "dawn", "campaign.toml")

with tempfile.TemporaryDirectory() as tmp:
    out = os.path.join(tmp, "cone.h5")
    subprocess.run([exe, "cone", campaign, "--point", "0", "--realisation", "0", "-o", out], check=True)
    with h5py.File(out, "r") as f:
        tb = f["delta_tb_mK"][()]
        z = f["z"][()]
        cell = float(f.attrs["cell_mpc"])
        mean_tb = f["history/mean_tb_mK"][()]
        tk = f["history/mean_tk_K"][()]
        ts = f["history/mean_ts_K"][()]
        x_hi = f["history/x_hi"][()]

    n = tb.shape[0]
    L = 64
    rows = []
    for c0 in range(0, tb.shape[2] - L + 1, L // 2):
        ch = tb[:, :, c0:c0 + L] - tb[:, :, c0:c0 + L].mean()
        P = np.abs(np.fft.fftn(ch) * cell**3) ** 2 / (n * n * L * cell**3)
        kx = 2 * np.pi * np.fft.fftfreq(n, cell)
        kz = 2 * np.pi * np.fft.fftfreq(L, cell)
        K = np.sqrt(kx[:, None, None] ** 2 + kx[None, :, None] ** 2 + kz[None, None, :] ** 2)
        sel = (K >= 0.08) & (K < 0.125)
        k_mid = c0 + L // 2
        rows.append((z[k_mid], float(np.mean(K[sel] ** 3 * P[sel] / (2 * np.pi**2))), mean_tb[k_mid], x_hi[k_mid],
                     tk[k_mid], ts[k_mid]))
    print(" z       Delta2(k~0.1) [mK^2]  mean dT_b [mK]  x_HI    T_K [K]   T_S [K]")
    for r in rows:
        print(f"{r[0]:6.2f}  {r[1]:14.2f}  {r[2]:14.2f}  {r[3]:6.3f}  {r[4]:8.2f}  {r[5]:8.2f}")

    failures = []
    band = (z > 12) & (z < 22)
    trough = mean_tb[band].min()
    z_trough = z[band][np.argmin(mean_tb[band])]
    print(f"global trough {trough:.1f} mK at z = {z_trough:.2f}")
    if not (-250 <= trough <= -50) or mean_tb.min() < trough - 1e-9:  # from memory (see docstring)
        failures.append(f"trough {trough:.1f} mK at z = {z_trough:.2f} (expected between -250 and -50 mK, 12 < z < 22)")

    zc = np.array([r[0] for r in rows])
    d2 = np.array([r[1] for r in rows])
    dawn, reion = zc > 12, zc < 12
    peak_dawn, peak_reion = d2[dawn].max(), d2[reion].max()
    i_dawn = np.flatnonzero(dawn)[np.argmax(d2[dawn])]
    i_reion = np.flatnonzero(reion)[np.argmax(d2[reion])]
    lo, hi = sorted((i_dawn, i_reion))
    dip = d2[lo:hi + 1].min()
    print(f"maxima: {peak_dawn:.1f} mK^2 at z = {zc[i_dawn]:.2f} (dawn), {peak_reion:.1f} mK^2 at z = {zc[i_reion]:.2f} "
          f"(reionization); dip between {dip:.1f} mK^2")
    if not (dip < 0.5 * min(peak_dawn, peak_reion)):  # separate maxima: fact of the trade
        failures.append("no separate cosmic-dawn and reionization maxima of Delta^2(k ~ 0.1)")

    # Bad values: one line, exit status 2.
    with open(campaign) as f:
        text = f.read()
    for bad, key in (("xray_threshold_energy_keV = 5.0", "spin_temperature.xray_threshold_energy_keV"),
                     ("start_redshift = 20.0", "spin_temperature.start_redshift")):
        path = os.path.join(tmp, "bad.toml")
        with open(path, "w") as f:
            f.write(text.replace("start_redshift = 30.0", bad))
        r = subprocess.run([exe, "cone", path, "--point", "0", "--realisation", "0", "-o", os.path.join(tmp, "x.h5")],
                           capture_output=True, text=True)
        msg = r.stderr.strip()
        if r.returncode != 2 or key not in msg or "\n" in msg or os.path.exists(os.path.join(tmp, "x.h5")):
            failures.append(f"bad value '{bad}': exit {r.returncode}, message {msg!r}")

if failures:
    print("\n".join(failures))
    sys.exit(1)
