"""The `above_wedge=<scenario>` selection term (docs/analysis.md) on a synthetic catalogue with a
[stats.scattering3d] block: the kept (unit, coefficient) pairs are exactly those whose first filter's
centre (ξ_j1, η_m1)/Δ lies on or above the scenario's wedge line k∥ = m(z) k⊥ + k_buffer at the unit's
redshift, with m(z) = D_c(z) H(z) sin θ / (c (1+z)) (DESIGN.md §5) computed independently here with
astropy.cosmology.FlatLambdaCDM (radiation included: Tcmb0, Neff, massless neutrinos). S0 is never
kept. Bad uses are one-line errors with exit status 2."""
import os
import subprocess
import sys

import h5py
import numpy as np
from astropy import units as u
from astropy.cosmology import FlatLambdaCDM

sys.path.insert(0, os.path.dirname(__file__))
from make_catalogue import make  # noqa: E402

SPINFLIP = os.environ.get("SPINFLIP", "spinflip")
FAIL = []


def check(ok, msg):
    print(("ok   " if ok else "FAIL ") + msg)
    if not ok:
        FAIL.append(msg)


d = os.environ.get("TMPDIR", "/tmp") + f"/spinflip-above-wedge-{os.getpid()}"
os.makedirs(d, exist_ok=True)
cat = os.path.join(d, "cat.h5")
make(cat, n_fid=80, n_stencil=10, n_train_points=2)

# The cosmology and cell size the term must read from the stored campaign (not the defaults),
# and two scenarios with different wedge settings.
h, om, ob, tcmb, neff, cell = 0.70, 0.30, 0.045, 2.7255, 3.046, 3.0
J, M, XI0, ETA0 = 4, 3, 3 * np.pi / 4, 3 * np.pi / 4
campaign = f"""[campaign]
name = "synthetic"
[cosmology]
h = {h}
omega_m = {om}
omega_b = {ob}
[cone]
cell_mpc = {cell}
"""
wedges = {"deep": (90.0, 0.0), "shallow": (30.0, 0.05)}  # wedge_angle_deg, wedge_buffer_per_mpc
axes = [(0, -1, -1, -1, -1)] + [(1, j, m, -1, -1) for j in range(J) for m in range(M)] + \
       [(2, a, b, c, e) for a in range(J) for b in range(M) for c in range(a, J) for e in range(b, M) if (c, e) != (a, b)]
unit_z = np.array([6.5, 8.0, 10.0, 14.0])
with h5py.File(cat, "r+") as f:
    f.attrs["campaign_text"] = campaign
    n_e = f["entries/point"].shape[0]
    rng = np.random.default_rng(1)
    for s, (angle, buf) in wedges.items():
        f[f"stats/{s}"].attrs["wedge_angle_deg"] = angle
        f[f"stats/{s}"].attrs["wedge_buffer_per_mpc"] = buf
        g = f.create_group(f"stats/{s}/scattering3d")
        g["values"] = rng.normal(size=(n_e, len(unit_z), len(axes)))
        for i, name in enumerate(("order", "j1", "m1", "j2", "m2")):
            g[name] = np.array([a[i] for a in axes], np.int64)
        g["unit_z"] = unit_z
        g["unit_freq_MHz"] = 1420.405751768 / (1 + unit_z)
        g.attrs.update({"unit_kind": "chunk", "xi0": XI0, "eta0": ETA0, "normalise": 0})

# astropy: the same flat ΛCDM with radiation (photons + Neff massless neutrinos)
cosmo = FlatLambdaCDM(H0=100 * h, Om0=om, Tcmb0=tcmb, Neff=neff, m_nu=0 * u.eV, Ob0=ob)
C_KM_S = 299792.458


def slope(z, angle):
    dc = cosmo.comoving_distance(z).to(u.Mpc).value
    hz = cosmo.H(z).to(u.km / u.s / u.Mpc).value
    return dc * hz * np.sin(np.radians(angle)) / (C_KM_S * (1 + z))


def run(select, out="cov.h5"):
    path = os.path.join(d, out)
    r = subprocess.run([SPINFLIP, "-q", "covariance", cat, "--select", select, "-o", path, "--no-plot", "--shrink"],
                       capture_output=True, text=True)
    return r, path


for s, (angle, buf) in wedges.items():
    r, path = run(f"kernel=scattering3d;scenario=deep;above_wedge={s}")
    check(r.returncode == 0, f"above_wedge={s} runs ({r.stderr.strip()[:200]})")
    if r.returncode:
        continue
    with h5py.File(path) as f:
        grp = next(f[k]["selection"] for k in f if isinstance(f[k], h5py.Group) and "selection" in f[k]) \
            if "selection" not in f else f["selection"]
        got = set(zip(grp["unit"][()].tolist(), grp["coeff"][()].tolist()))
    want, margin_ok = set(), True
    for un, z in enumerate(unit_z):
        m = slope(z, angle)
        for c, (o, j1, m1, _, _) in enumerate(axes):
            if o == 0:
                continue
            kperp, kpar = XI0 * 2.0 ** -j1 / cell, ETA0 * 2.0 ** -m1 / cell
            line = m * kperp + buf
            if abs(kpar - line) < 1e-3 * line:  # too close to call against a second implementation
                margin_ok = False
            if kpar >= line:
                want.add((un, c))
    check(margin_ok, f"{s}: no filter within 0.1% of the line (the comparison is decisive)")
    check(got == want, f"above_wedge={s}: {len(got)} kept (unit, coeff) pairs equal astropy's {len(want)} "
                       f"(slopes {', '.join(f'{slope(z, angle):.3f}' for z in unit_z)})")
    check(0 < len(want) < len(unit_z) * (len(axes) - 1), f"{s}: the line keeps some and drops some coefficients")

# errors: one line, exit status 2
for select, what in (("kernel=scattering3d;above_wedge=nowhere", "unknown scenario"),
                     ("kernel=power;above_wedge=deep", "kernel without filters")):
    r, _ = run(select)
    lines = r.stderr.strip().splitlines()
    check(r.returncode == 2 and len(lines) == 1 and "above_wedge" in lines[0], f"{what}: exit {r.returncode}: {lines[:1]}")
if FAIL:
    sys.exit(f"{len(FAIL)} check(s) failed")
print("all checks passed")
