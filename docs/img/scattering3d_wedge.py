"""Draws docs/img/scattering3d_wedge.png: the centres (ξ_j, η_m)/Δ of the [stats.scattering3d] filters
(defaults J = 4, M = 3, ρ = 0.5; bars: the half-maximum width of R_j and Z_m) in the (k⊥, k∥) plane,
over the foreground-wedge line k∥ = m(z) k⊥ + k_buffer of the demo's scenarios (horizon wedge,
θ = 90°; the `shallow` scenario's 0.05 Mpc⁻¹ buffer) at three redshifts, for cells of Δ = 2 Mpc.
m(z) = D_c H sin θ / (c (1+z)) (DESIGN.md §5) with astropy at spinflip's default cosmology.
Filled markers: filters that `above_wedge=` keeps at z = 8.5 without buffer.
    /usr/bin/python3 docs/img/scattering3d_wedge.py"""
import os

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402
from astropy import units as u  # noqa: E402
from astropy.cosmology import FlatLambdaCDM  # noqa: E402

cosmo = FlatLambdaCDM(H0=67.66, Om0=0.3111, Ob0=0.04897, Tcmb0=2.7255, Neff=3.046, m_nu=0 * u.eV)
C_KM_S = 299792.458
J, M, XI0, ETA0, RHO, CELL = 4, 3, 3 * np.pi / 4, 3 * np.pi / 4, 0.5, 2.0
HALF = np.sqrt(2 * np.log(2))  # a Gaussian falls to half its peak at ±1.18 σ


def slope(z, angle=90.0):
    dc = cosmo.comoving_distance(z).to(u.Mpc).value
    hz = cosmo.H(z).to(u.km / u.s / u.Mpc).value
    return dc * hz * np.sin(np.radians(angle)) / (C_KM_S * (1 + z))


fig, ax = plt.subplots(figsize=(6.4, 5.2))
kp = np.geomspace(5e-3, 3.0, 200)
z_ref = 8.5
ax.fill_between(kp, 1e-3, slope(z_ref) * kp, color="0.88", zorder=0,
                label=f"wedge at z = {z_ref} (horizon)")
for z, style in ((7.0, ":"), (z_ref, "-"), (10.0, "--")):
    ax.plot(kp, slope(z) * kp, "k", ls=style, lw=1, label=f"k∥ = m(z) k⊥, z = {z:g} (m = {slope(z):.2f})")
ax.plot(kp, slope(z_ref) * kp + 0.05, color="tab:red", lw=1, label=f"z = {z_ref}, buffer 0.05 Mpc⁻¹")
colors = plt.cm.viridis(np.linspace(0, 0.85, M))
for m in range(M):
    for j in range(J):
        xi, eta = XI0 * 2.0 ** -j / CELL, ETA0 * 2.0 ** -m / CELL
        kept = eta >= slope(z_ref) * xi
        ax.errorbar(xi, eta, xerr=HALF * RHO * xi, yerr=HALF * RHO * eta, fmt="none", capsize=2, lw=0.7,
                    color=colors[m], alpha=0.45, zorder=2)
        ax.plot(xi, eta, "o", ms=7, color=colors[m], mfc=colors[m] if kept else "white", zorder=3,
                label=f"filters at η_{m} (m = {m})" if j == J - 1 else None)
        ax.annotate(f"{j},{m}", (xi, eta), textcoords="offset points", xytext=(5, 5), fontsize=7)
ax.set_xscale("log")
ax.set_yscale("log")
ax.set_xlim(0.02, 2.0)
ax.set_ylim(0.04, 2.0)
ax.set_xlabel(r"$k_\perp = \xi_j/\Delta$  [Mpc$^{-1}$]")
ax.set_ylabel(r"$k_\parallel = \eta_m/\Delta$  [Mpc$^{-1}$]")
ax.set_title("Cylindrical scattering filters (j, m) over the foreground wedge\n"
             "J = 4, M = 3, ρ = 0.5, Δ = 2 Mpc; filled: centre above the z = 8.5 line (kept);\n"
             "bars: half-maximum width of R_j and Z_m; labels j,m", fontsize=9)
ax.legend(fontsize=7, loc="lower right")
fig.tight_layout()
out = os.path.join(os.path.dirname(os.path.abspath(__file__)), "scattering3d_wedge.png")
fig.savefig(out, dpi=120)
print("wrote", out)
