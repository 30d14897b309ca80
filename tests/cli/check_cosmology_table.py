"""`spinflip cosmology` against astropy.cosmology (Planck 2018 defaults, massless
neutrinos), the 21-cm rest frequency 1420.405751768 MHz (standard constant), and
the horizon wedge slope m(z) = D_C H / (c (1+z)) evaluated with astropy (common practice)."""
import os
import subprocess
import sys

import numpy as np
from astropy import units as u
from astropy.cosmology import FlatLambdaCDM

exe = os.environ["SPINFLIP"]
out = subprocess.run([exe, "cosmology", "--z", "6:12:2"], check=True, capture_output=True, text=True).stdout
rows = np.array([[float(x) for x in line.split()] for line in out.splitlines() if not line.startswith("#")])
assert rows.shape == (4, 9), rows.shape
cos = FlatLambdaCDM(H0=67.66, Om0=0.3111, Tcmb0=2.7255 * u.K, Neff=3.046, m_nu=0 * u.eV, Ob0=0.04897)
z = rows[:, 0]
assert np.allclose(z, [6, 8, 10, 12])
assert np.allclose(rows[:, 1], 1420.405751768 / (1 + z), rtol=1e-6)
assert np.allclose(rows[:, 2], cos.comoving_distance(z).to_value(u.Mpc), rtol=1e-6)
assert np.allclose(rows[:, 3], cos.H(z).to_value(u.km / u.s / u.Mpc), rtol=1e-6)
# Mpc per arcminute: comoving transverse distance × 1 arcmin (flat universe).
assert np.allclose(rows[:, 7], cos.comoving_transverse_distance(z).to_value(u.Mpc) * np.pi / 180 / 60, rtol=1e-5)
# Horizon wedge slope at z = 8 (and the other rows) from astropy distances and H(z).
c_km_s = 299792.458
m_ref = cos.comoving_distance(z).to_value(u.Mpc) * cos.H(z).to_value(u.km / u.s / u.Mpc) / (c_km_s * (1 + z))
assert np.allclose(rows[:, 8], m_ref, rtol=1e-5), (rows[:, 8], m_ref)
assert 2.5 < rows[1, 8] < 4.0, rows[1, 8]  # m(z=8) ≈ 3 for Planck parameters (from memory)

out = subprocess.run([exe, "cosmology", "--freq-MHz", "142.0405751768"], check=True, capture_output=True,
                     text=True).stdout
row = [line for line in out.splitlines() if not line.startswith("#")][0].split()
assert abs(float(row[0]) - 9.0) < 1e-9, row

bad = subprocess.run([exe, "cosmology", "--z", "abc"], capture_output=True, text=True)
assert bad.returncode == 2 and "not a number" in bad.stderr, (bad.returncode, bad.stderr)
print("spinflip cosmology agrees with astropy")
