"""σ(M), the EPS collapsed fraction and the mass-dependent ionizing yield of
src/sim against scipy (general-purpose reference library: special.erfc,
integrate.quad). Run by ctest with the dump tool's path as argument."""
import json
import subprocess
import sys

import numpy as np
from scipy import integrate, special

data = json.loads(subprocess.run([sys.argv[1]], check=True, capture_output=True, text=True).stdout)
pk = np.array(data["pk"])
lnk, lnp = np.log(pk[:, 0]), np.log(pk[:, 1])
rho = data["rho_mean"]
dc = data["delta_c"]


def power(k):
    return np.exp(np.interp(np.log(k), lnk, lnp))


def sigma2_of_mass(m):
    r = (3 * m / (4 * np.pi * rho)) ** (1 / 3)

    def integrand(lk):
        k = np.exp(lk)
        x = k * r
        w = 3 * (np.sin(x) - x * np.cos(x)) / x**3
        return power(k) * w * w * k**3 / (2 * np.pi**2)

    # Top-hat variance σ²(R) = ∫ P(k) W²(kR) k² dk / (2π²) (common practice), in ln k.
    val, _ = integrate.quad(integrand, lnk[0], min(lnk[-1], np.log(200 / r)), limit=800)
    return val


failures = []
for m, s2 in data["sigma2"]:
    ref = sigma2_of_mass(m)
    # 1e-3: log-log interpolation of P in the reference and of σ² in the table
    if abs(s2 / ref - 1) > 1e-3:
        failures.append(f"sigma2(M={m:g}) = {s2:.6g}, scipy {ref:.6g}")

for d, g, m_r, m_min, f in data["fcoll"]:
    s_r, s_min = sigma2_of_mass(m_r), sigma2_of_mass(m_min)
    # EPS collapsed fraction (Lacey & Cole 1993; DESIGN.md §4)
    ref = special.erfc((dc / g - d) / np.sqrt(2 * (s_min - s_r)))
    if abs(f - ref) > 2e-3 * ref + 1e-12:  # σ² agree to 1e-3, which moves erfc by about as much
        failures.append(f"fcoll{(d, g, m_r, m_min)} = {f:.6g}, scipy {ref:.6g}")

e = data["efficiency"]
# σ²(M) on a fine grid by quad, cubic spline in ln M for the mass integral (and its derivative).
from scipy.interpolate import CubicSpline
grid = np.linspace(np.log(1e4), np.log(1e17), 400)
spline = CubicSpline(grid, np.log([sigma2_of_mass(np.exp(x)) for x in grid]))


def zeta(m):
    x = m / 1e10
    fs = min(1.0, e["fstar10"] * x ** e["alpha_star"])
    fe = min(1.0, e["fesc10"] * x ** e["alpha_esc"])
    return e["photons_per_baryon"] * fs * fe * np.exp(-e["m_turn"] / m)


for d, g, m_r, m_min, f in data["yield"]:
    s_r = float(np.exp(spline(np.log(m_r))))
    b = dc / g - d

    def integrand(lm):
        m = np.exp(lm)
        s = np.exp(spline(lm))
        ds_dlnm = s * spline(lm, 1)
        v = s - s_r
        if v <= 0:
            return 0.0
        # EPS conditional mass fraction per ln M (Bond et al. 1991; Lacey & Cole 1993)
        return zeta(m) * b / np.sqrt(2 * np.pi) * v**-1.5 * np.exp(-b * b / (2 * v)) * abs(ds_dlnm)

    ref, _ = integrate.quad(integrand, np.log(m_min), np.log(m_r), limit=200, epsrel=1e-6)
    if abs(f / ref - 1) > 1e-2:  # σ² to 1e-3 in the exponent b²/(2(σ²−σ²_R)) and a splined dσ²/dM
        failures.append(f"yield{(d, g, m_r, m_min)} = {f:.6g}, scipy {ref:.6g}")

if failures:
    print("\n".join(failures))
    sys.exit(1)
print("sigma2, fcoll and yield agree with scipy")
