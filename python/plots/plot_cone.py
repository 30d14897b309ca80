"""Preview picture of a `spinflip cone` file.

usage: plot_cone.py CONE.h5 OUT.png
Rows: the simulated cone (no instrument) and each instrument scenario in the
file. Columns: a transverse slice at the cone's mid-reionization (mean x_HI
nearest 0.5; the middle of the band when the cone never crosses it) and a
line-of-sight cut (observed frequency below, redshift on top). A last row shows
the uv coverage of the first scenario that has one (in wavelengths) and the
global histories; with the spin-temperature model a row above it shows the
cosmic-dawn history (T_K, T_S, T_CMB, x_α, x_HI and mean δT_b). Signed maps use a diverging colour map centred on 0.
Called by `spinflip cone --preview`; runnable by hand the same way.
"""
import sys

import h5py
import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402

NU21_MHZ = 1420.405751768
RAW = "simulated cone (no instrument)"

# The history panel: (dataset under /history, label, colour, axis). Axis "left"
# is the neutral fraction (0-1), "right" the temperatures in mK; a curve whose
# dataset is absent is skipped, so new histories are one line here.
HISTORY_CURVES = [
    ("x_hi", "neutral fraction x_HI", "C0", "left"),
    ("mean_tb_mK", "mean δT_b [mK]", "C3", "right"),
]


def text(v):
    return v.decode() if isinstance(v, bytes) else str(v)


def campaign_table(f):
    """The campaign text stored in the file, parsed (tomllib: Python ≥ 3.11); {} if unavailable."""
    try:
        import tomllib
        return tomllib.loads(text(f.attrs["campaign_text"]))
    except Exception:  # older Python or no text: the preview just says less
        return {}


def colour_scale(cube):
    """A diverging map centred on 0 for a signed field, a sequential one otherwise."""
    lo, hi = np.percentile(cube, [0.5, 99.5])
    if lo < 0 < hi:
        lim = max(abs(lo), abs(hi), 1e-6)
        return dict(cmap="RdBu_r", vmin=-lim, vmax=lim)
    return dict(cmap="magma", vmin=min(lo, 0.0), vmax=max(hi, 1e-6))


def number(v):
    """3 significant digits, powers of ten written out: 2×10⁴, 30, 0.125."""
    m, e = f"{v:.3g}".partition("e")[::2]
    if not e:
        return m
    sup = str(int(e)).translate(str.maketrans("-0123456789", "⁻⁰¹²³⁴⁵⁶⁷⁸⁹"))
    return ("" if m == "1" else f"{m}×") + f"10{sup}"


def param_text(label, value):
    """ "T_vir,min = 2×10⁴ K" from the label "T_vir,min [K]"."""
    if label.endswith("]") and " [" in label:
        name, unit = label[:-1].split(" [", 1)
        return f"{name} = {number(value)} {unit}"
    return f"{label} = {number(value)}"


def title_of(f):
    point, real = int(f.attrs["point"]), int(f.attrs["realisation"])
    role = text(f.attrs["role"]) if "role" in f.attrs else ""
    names = [text(s) for s in f.attrs.get("param_labels", f.attrs.get("param_names", []))]
    values = np.atleast_1d(f.attrs.get("params", []))
    params = ", ".join(param_text(n, v) for n, v in zip(names, values))
    head = f"design point {point}" + (f" ({role})" if role else "") + f", realisation {real}"
    return head + (f"\n{params}" if params else "")


def mid_reionization(z, x_hi):
    """LOS index of the cone's mid-reionization: mean x_HI nearest 0.5, if it crosses 0.5."""
    if x_hi.size == z.size and x_hi.min() < 0.5 < x_hi.max():
        return int(np.argmin(np.abs(x_hi - 0.5))), "mid-reionization"
    return z.size // 2, "middle of the band"


def uv_panel(ax, f, table):
    name = next(iter(f["uv"]))
    t = f["uv"][name][()]
    freq = float(f["uv"].attrs["freq_MHz"])
    cell = float(f.attrs["cell_mpc"])
    # Comoving distance at the uv frequency: u = k_perp D_c / 2π (common practice), k_perp = 2π m / (N Δ).
    i = int(np.argmin(np.abs(f["freq_MHz"][()] - freq)))
    dist = float(f["distance_mpc"][i])
    n = t.shape[0]
    du = dist / (n * cell)  # wavelengths per uv cell
    hours = table.get("scenarios", {}).get(name, {}).get("observing_hours")
    shifted = np.fft.fftshift(t)
    if hours:
        shown, label = shifted / (3600.0 * float(hours)), "baselines per uv cell\n(time-averaged)"
    else:
        shown, label = shifted / 3600.0, "baseline-hours per uv cell"
    shown = np.where(shifted > 0, shown, np.nan)
    half = n / 2 * du
    im = ax.imshow(shown.T, origin="lower", cmap="viridis", norm=matplotlib.colors.LogNorm(),
                   extent=[-half - du / 2, half - du / 2, -half - du / 2, half - du / 2])
    ax.set_title(f"uv coverage of scenario '{name}' at {freq:.1f} MHz", fontsize=9)
    ax.set_xlabel("u [wavelengths]")
    ax.set_ylabel("v [wavelengths]")
    plt.colorbar(im, ax=ax, label=label, fraction=0.046)


def history_panel(ax, f, z, marker_z):
    h = f["history"]
    twin = None
    for key, label, colour, side in HISTORY_CURVES:
        if key not in h:
            continue
        target = ax
        if side == "right":
            twin = twin or ax.twinx()
            target = twin
        target.plot(z, h[key][()], color=colour, label=label)
        target.set_ylabel(label, color=colour)
    ax.set_ylim(-0.02, 1.02)
    ax.axvline(marker_z, color="0.5", ls=":", lw=1)
    ax.set_xlabel("redshift")
    ax.set_title("global history of this cone (dotted: the slice shown)", fontsize=9)


def dawn_panel(ax, z, x_hi, tb, dawn):
    """Cosmic-dawn history: temperatures (log), x_α, x_HI and mean δT_b against redshift."""
    ax.semilogy(z, dawn["mean_tk_K"], color="C1", label="T_K")
    ax.semilogy(z, dawn["mean_ts_K"], color="C2", label="T_S")
    ax.semilogy(z, 2.7255 * (1 + z), color="0.5", ls="--", label="T_CMB")
    ax.semilogy(z, np.maximum(dawn["mean_x_alpha"], 1e-4), color="C4", ls=":", label="x_α")
    ax.semilogy(z, np.maximum(x_hi, 1e-4), color="C0", ls="-.", label="x_HI")
    ax.set_xlabel("redshift")
    ax.set_ylabel("K  (x_α, x_HI: plain number)")
    ax.legend(loc="lower left", fontsize=8, ncol=5)
    twin = ax.twinx()
    twin.plot(z, tb, color="C3")
    twin.axhline(0.0, color="C3", lw=0.5)
    twin.set_ylabel("mean δT_b [mK]", color="C3")
    ax.set_title("cosmic-dawn history of this cone (plane means)", fontsize=9)


def main(src, dst):
    with h5py.File(src, "r") as f:
        table = campaign_table(f)
        cubes = [(RAW, f["delta_tb_mK"][()])]
        if "observed" in f:
            cubes += [(f"scenario '{name}'", f["observed"][name][()]) for name in f["observed"]]
        freq, z = f["freq_MHz"][()], f["z"][()]
        dist = f["distance_mpc"][()]
        cell = float(f.attrs["cell_mpc"])
        x_hi = f["history/x_hi"][()]
        slice_at, why = mid_reionization(z, x_hi)
        dawn = {k: f["history"][k][()] for k in ("mean_tk_K", "mean_ts_K", "mean_x_alpha")} \
            if "mean_ts_K" in f["history"] else None
        rows = len(cubes) + 1 + (dawn is not None)
        fig = plt.figure(figsize=(15, 3.4 * rows + 0.5))
        grid = fig.add_gridspec(rows, 2, width_ratios=[1, 3.2])
        n_perp, _, n_los = cubes[0][1].shape
        width = n_perp * cell
        for r, (name, cube) in enumerate(cubes):
            scale = colour_scale(cube)
            ax = fig.add_subplot(grid[r, 0])
            im = ax.imshow(cube[:, :, slice_at].T, origin="lower", extent=[0, width, 0, width], **scale)
            ax.set_title(f"{name}\nslice at {freq[slice_at]:.2f} MHz, z = {z[slice_at]:.2f} ({why})", fontsize=9)
            ax.set_xlabel("x [comoving Mpc]")
            ax.set_ylabel("y [comoving Mpc]")
            fig.colorbar(im, ax=ax, label="δT_b [mK]", fraction=0.046)
            ax = fig.add_subplot(grid[r, 1])
            # Cell 0 is the lowest redshift (highest frequency): frequency falls to the right.
            im = ax.imshow(cube[n_perp // 2, :, :], origin="lower", aspect="auto", extent=[freq[0], freq[-1], 0, width],
                           **scale)
            ax.axvline(freq[slice_at], color="k", ls=":", lw=0.8)
            ax.set_title(f"{name}: line-of-sight cut (comoving distance {dist[0]:.0f}–{dist[-1]:.0f} Mpc)", fontsize=9)
            ax.set_xlabel("observed frequency [MHz]")
            ax.set_ylabel("y [comoving Mpc]")
            top = ax.secondary_xaxis("top", functions=(lambda nu: NU21_MHZ / nu - 1, lambda zz: NU21_MHZ / (1 + zz)))
            top.set_xlabel("redshift")
            fig.colorbar(im, ax=ax, label="δT_b [mK]", fraction=0.02)
        if dawn is not None:  # spin temperature cell by cell: a cosmic-dawn row above the histories
            dawn_panel(fig.add_subplot(grid[rows - 2, :]), z, x_hi, f["history/mean_tb_mK"][()], dawn)
        history_panel(fig.add_subplot(grid[rows - 1, 1]), f, z, z[slice_at])
        ax = fig.add_subplot(grid[rows - 1, 0])
        if "uv" in f:
            uv_panel(ax, f, table)
        else:
            ax.axis("off")
            ax.text(0.0, 0.5, f"no interferometer in this file\n{n_perp}×{n_perp}×{n_los} cells of {cell:g} Mpc",
                    fontsize=10)
        fig.suptitle(f"spinflip cone: {title_of(f)}", fontsize=11)
    fig.tight_layout(rect=(0, 0, 1, 1 - 0.7 / fig.get_figheight()))  # room for the two-line title
    fig.savefig(dst, dpi=110)


if __name__ == "__main__":
    if len(sys.argv) != 3:
        sys.exit("usage: plot_cone.py CONE.h5 OUT.png")
    main(sys.argv[1], sys.argv[2])
