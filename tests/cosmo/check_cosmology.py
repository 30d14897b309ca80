"""External checks of src/cosmo: background against astropy.cosmology, growth
against scipy's ODE solver, and the σ(R) integral against scipy integration
of the same tabulated P(k)."""
import json
import subprocess
import sys

import numpy as np
from astropy import units as u
from astropy.cosmology import FlatLambdaCDM
from scipy.integrate import simpson, solve_ivp

data = json.loads(subprocess.run([sys.argv[1]], check=True, capture_output=True, text=True).stdout)
cos = FlatLambdaCDM(H0=100 * data["h"], Om0=data["omega_m"], Tcmb0=data["T_cmb_K"] * u.K,
                    Neff=data["n_eff"], m_nu=0 * u.eV, Ob0=data["omega_b"])
failures = []


def check(name, got, want, rtol):
    if not np.isclose(got, want, rtol=rtol, atol=0):
        failures.append(f"{name}: spinflip {got:.10g} vs reference {want:.10g} (rtol {rtol})")


# astropy: radiation density (photons + massless neutrinos), distances, H(z).
check("omega_r", data["omega_r"], cos.Ogamma0 + cos.Onu0, 1e-6)
for z, dc, hz, da, growth, rate in data["background"]:
    check(f"D_C(z={z})", dc, cos.comoving_distance(z).to_value(u.Mpc), 1e-7)
    check(f"H(z={z})", hz, cos.H(z).to_value(u.km / u.s / u.Mpc), 1e-10)
    check(f"D_A(z={z})", da, cos.angular_diameter_distance(z).to_value(u.Mpc), 1e-7)

# scipy: linear growth ODE in ln a with astropy's densities, D'' + (2 + dlnE/dlna) D' = 1.5 Ωm(a) D
# (common practice), starting on the Mészáros growing mode deep in the radiation era.
om, orad, ol = cos.Om0, cos.Ogamma0 + cos.Onu0, cos.Ode0


def rhs(x, y):
    a = np.exp(x)
    m, r = om / a**3, orad / a**4
    e2 = m + r + ol
    return [y[1], -(2 + (-3 * m - 4 * r) / (2 * e2)) * y[1] + 1.5 * m / e2 * y[0]]


a0 = 1e-7
y0 = [1 + 1.5 * a0 * om / orad, 1.5 * a0 * om / orad]
zs = np.array([row[0] for row in data["background"]])
xs = np.concatenate([-np.log1p(zs)[::-1], [0.0]])
sol = solve_ivp(rhs, (np.log(a0), 0.0), y0, t_eval=xs, rtol=1e-11, atol=1e-14, method="DOP853")
d_today = sol.y[0][-1]
for i, z in enumerate(zs[::-1]):
    row = next(r for r in data["background"] if r[0] == z)
    check(f"D(z={z})", row[4], sol.y[0][i] / d_today, 1e-6)
    check(f"f(z={z})", row[5], sol.y[1][i] / sol.y[0][i], 1e-5)

# scipy: σ²(R) = ∫ k³P(k) W²(kR) dlnk / 2π² with the top-hat window, on the dumped P(k).
pk = np.array(data["power"])
lnk = np.log(pk[:, 0])
for R, sigma in data["sigma"]:
    x = pk[:, 0] * R
    w = 3 * (np.sin(x) - x * np.cos(x)) / x**3
    s2 = simpson(pk[:, 0] ** 3 * pk[:, 1] * w**2 / (2 * np.pi**2), x=lnk)
    check(f"sigma(R={R:.4g})", sigma, np.sqrt(s2), 2e-4)

if failures:
    print("\n".join(failures))
    sys.exit(1)
print(f"cosmology agrees with astropy {__import__('astropy').__version__} and scipy")
