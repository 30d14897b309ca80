"""Synthetic catalogues in the layout of docs/catalogue.md, written with h5py,
from a linear Gaussian model with known truth:

    x(θ, r) = μ0 + A (φ(θ) − φ(θ_fid)) + L ε_r,   ε_r ~ N(0, I),   C = L Lᵀ

φ is θ with log10 taken of the log-sampled parameters (the coordinates the
Fisher verb uses). ε_r depends on the realisation only (stencil points reuse
the fiducial's seeds), so realisation-matched central differences recover A
exactly. The "scattering" kernel's order-0 coefficient is exactly 0 in every
entry (like a mean removed by the k = 0 cut), to exercise constant-column handling.

make(path, **options) writes the file and returns the truth as a dict.
"""
import sys

import h5py
import numpy as np

PARAMS = [  # name, unit, log, min, max, fiducial, steps (in φ coordinates)
    ("zeta", "", 0, 10.0, 50.0, 30.0, (2.0, 4.0)),
    ("L_X", "erg/s/SFR", 1, 1e38, 1e42, 1e40, (0.1, 0.2)),
    ("E_0", "keV", 0, 0.2, 1.2, 0.5, (0.05, 0.1)),
]
SCENARIOS = ["deep", "shallow"]
N_POWER_UNITS, N_POWER_K = 3, 4
N_SCAT_UNITS = 4
SCAT_AXES = {  # order, j1, l1, j2, l2 (rotation-averaged form)
    "order": [0, 1, 1, 1, 2, 2],
    "j1": [-1, 0, 1, 2, 0, 1],
    "l1": [-1, -1, -1, -1, -1, -1],
    "j2": [-1, -1, -1, -1, 1, 2],
    "l2": [-1, -1, -1, -1, 0, 0],
}


def per_orientation_axes(J=2, L=4):
    """Scattering stored per orientation (reduce = "none"): S0, S1(j, l), S2(j1, l1, j2, l2) for j2 > j1."""
    ax = {k: [] for k in ("order", "j1", "l1", "j2", "l2")}

    def add(o, a, b, c, d):
        for k, v in zip(ax, (o, a, b, c, d)):
            ax[k].append(v)
    add(0, -1, -1, -1, -1)
    for j in range(J):
        for l in range(L):
            add(1, j, l, -1, -1)
    for j1 in range(J):
        for j2 in range(j1 + 1, J):
            for l1 in range(L):
                for l2 in range(L):
                    add(2, j1, l1, j2, l2)
    return ax


ROTATION_AVERAGED = SCAT_AXES


def phi(theta):
    return np.array([np.log10(v) if p[2] else v for v, p in zip(theta, PARAMS)])


def blocks():
    """(scenario, kernel, n_units, n_coeff) in the reader's sorted order."""
    out = []
    for s in sorted(SCENARIOS):
        for k in sorted(["power", "scattering"]):
            if k == "power":
                out.append((s, k, N_POWER_UNITS, N_POWER_K))
            else:
                out.append((s, k, N_SCAT_UNITS, len(SCAT_AXES["order"])))
    return out


def full_index():
    """(scenario, kernel, unit, coeff) → position in the full model vector."""
    idx, k = {}, 0
    for s, kern, nu, nc in blocks():
        for u in range(nu):
            for c in range(nc):
                idx[(s, kern, u, c)] = k
                k += 1
    return idx


def make(path, n_fid=300, n_stencil=60, n_train_points=20, n_train_real=3, seed=7, pending=0, failed=0,
         no_fiducial=False, no_stencil=False, unmatched=False, fixed_strings=False, noise=1.0, per_orientation=False):
    global SCAT_AXES
    SCAT_AXES = per_orientation_axes() if per_orientation else ROTATION_AVERAGED
    rng = np.random.default_rng(seed)
    idx = full_index()
    D = len(idx)
    const = np.zeros(D, bool)
    for (s, kern, u, c), i in idx.items():
        if kern == "scattering" and SCAT_AXES["order"][c] == 0:
            const[i] = True
    p = len(PARAMS)
    mu0 = 50.0 + 10.0 * rng.random(D)
    A = rng.normal(size=(D, p)) * np.array([0.05, 2.0, 3.0])  # O(1) response over each parameter's range
    # A correlated, well-conditioned noise: L lower-triangular.
    L = np.tril(rng.normal(scale=0.15, size=(D, D)), -1) + np.diag(0.5 + rng.random(D))
    L *= noise
    mu0[const] = 0.0
    A[const] = 0.0
    L[const] = 0.0
    C = L @ L.T

    fid = np.array([q[5] for q in PARAMS])
    points, roles, sp, sstep, sidx = [], [], [], [], []

    def add(theta, role, param=-1, step=0.0, step_index=-1):
        points.append(np.array(theta, float))
        roles.append(role)
        sp.append(param)
        sstep.append(step)
        sidx.append(step_index)
        return len(points) - 1

    fid_pt = add(fid, "list" if no_fiducial else "fiducial")
    if not no_stencil:
        for i, q in enumerate(PARAMS):
            for s_i, h in enumerate(q[6]):
                for sign, role in ((1, "stencil+"), (-1, "stencil-")):
                    ph = phi(fid)
                    ph[i] += sign * h
                    theta = fid.copy()
                    theta[i] = 10 ** ph[i] if q[2] else ph[i]
                    add(theta, role, i, theta[i] - fid[i], s_i)
    lo = np.array([q[3] for q in PARAMS])
    hi = np.array([q[4] for q in PARAMS])
    for _ in range(n_train_points):
        u = rng.random(p)
        theta = np.where([q[2] for q in PARAMS], 10 ** (np.log10(lo) + u * (np.log10(hi) - np.log10(lo))),
                         lo + u * (hi - lo))
        add(theta, "training")
    n_points = len(points)
    seed_point = [fid_pt if r.startswith("stencil") else i for i, r in enumerate(roles)]

    # Entries: fiducial n_fid realisations, stencil n_stencil, training n_train_real.
    e_point, e_real = [], []
    for pt, role in enumerate(roles):
        n = n_fid if pt == fid_pt else n_stencil if role.startswith("stencil") else n_train_real
        for r in range(n):
            e_point.append(pt)
            e_real.append(r)
    e_point = np.array(e_point)
    e_real = np.array(e_real)
    n_e = len(e_point)
    eps = rng.normal(size=(max(n_fid, n_stencil, n_train_real), D))
    # Training points and unmatched stencils draw their own noise.
    values = np.empty((n_e, D))
    for e in range(n_e):
        pt, r = e_point[e], e_real[e]
        if roles[pt] == "training" or (unmatched and roles[pt].startswith("stencil")):
            z = rng.normal(size=D)
        else:
            z = eps[r]
        values[e] = mu0 + A @ (phi(points[pt]) - phi(fid)) + L @ z
    status = np.ones(n_e, np.int8)
    fid_entries = np.where(e_point == fid_pt)[0]
    status[fid_entries[:pending]] = 0
    status[fid_entries[pending:pending + failed]] = 2
    values[status != 1] = np.nan

    def strings(v):
        if fixed_strings:
            return np.array([s.encode() for s in v], dtype="S24")
        return np.array(v, dtype=h5py.string_dtype())

    with h5py.File(path, "w") as f:
        f.attrs["format_version"] = 1
        f.attrs["tool_version"] = "synthetic-test"
        f.attrs["git_revision"] = "none"
        f.attrs["campaign_sha256"] = "0" * 64
        f.attrs["campaign_text"] = "# synthetic linear-Gaussian test catalogue\n"
        f.attrs["created_utc"] = "2026-12-02T00:00:00Z"
        d = f.create_group("design")
        d["param_names"] = strings([q[0] for q in PARAMS])
        d["param_units"] = strings([q[1] for q in PARAMS])
        d["param_log"] = np.array([q[2] for q in PARAMS], np.int8)
        d["param_min"] = lo
        d["param_max"] = hi
        d["param_fiducial"] = fid
        d["points"] = np.array(points)
        d["role"] = strings(roles)
        d["design_index"] = np.zeros(n_points, np.int32)
        d["stencil_param"] = np.array(sp, np.int32)
        d["stencil_step"] = np.array(sstep)
        d["stencil_step_index"] = np.array(sidx, np.int32)
        d["seed_point"] = np.array(seed_point, np.int64)
        en = f.create_group("entries")
        en["point"] = e_point.astype(np.int64)
        en["realisation"] = e_real.astype(np.int64)
        en["params"] = np.array(points)[e_point]
        en["seed"] = np.stack([np.full(n_e, 1), np.array(seed_point)[e_point], e_real], 1).astype(np.uint64)
        en["status"] = status
        en["error"] = np.array([b""] * n_e, dtype="S256")
        en["seconds"] = np.ones(n_e)
        en["rank"] = np.zeros(n_e, np.int32)
        for s, kern, nu, nc in blocks():
            g = f.create_group(f"stats/{s}/{kern}")
            cols = [idx[(s, kern, u, c)] for u in range(nu) for c in range(nc)]
            g["values"] = values[:, cols].reshape(n_e, nu, nc)
            if kern == "power":
                edges = np.geomspace(0.05, 2.0, nc + 1)
                g["k_lo"], g["k_hi"] = edges[:-1], edges[1:]
                g["k_mean"] = np.sqrt(edges[:-1] * edges[1:])
                g["n_modes"] = np.array([10, 40, 160, 640], np.int64)
                g.attrs["unit_kind"] = "chunk"
                g.attrs["bins"] = nc
                freq = np.linspace(130.0, 170.0, nu)
            else:
                for a, v in SCAT_AXES.items():
                    g[a] = np.array(v, np.int32)
                g.attrs["unit_kind"] = "slice"
                g.attrs["reduce"] = "none" if per_orientation else "rotation"
                g.attrs["normalise"] = 0
                freq = np.linspace(125.0, 175.0, nu)
            g["unit_freq_MHz"] = freq
            g["unit_z"] = 1420.405751 / freq - 1.0
    return {"mu0": mu0, "A": A, "C": C, "const": const, "index": idx, "fiducial_point": fid_pt,
            "values": values, "entry_point": e_point, "entry_realisation": e_real, "status": status,
            "roles": roles, "points": np.array(points), "scat_axes": {k: np.array(v) for k, v in SCAT_AXES.items()}}


if __name__ == "__main__":
    make(sys.argv[1])
