"""Preview picture of a `spinflip cone` file.

usage: plot_cone.py CONE.h5 OUT.png
Rows: the clean cone and each observed scenario in the file. Columns: a
transverse slice at the middle of the band and a line-of-sight cut (observed
frequency on the x axis). A last row shows the histories x_HI(z) and mean δT_b(z),
with the spin-temperature model a row above it the cosmic-dawn history (T_K, T_S, T_CMB,
x_α, and again x_HI and mean δT_b),
and, when the file holds uv coverage (/uv/<scenario>), the observing time per uv
cell. Called by `spinflip cone --preview`; runnable by hand the same way.
"""
import sys

import h5py
import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402


def main(src, dst):
    with h5py.File(src, "r") as f:
        cubes = [("clean", f["delta_tb_mK"][()])]
        if "observed" in f:
            cubes += [(name, f["observed"][name][()]) for name in f["observed"]]
        freq = f["freq_MHz"][()]
        z = f["z"][()]
        dist = f["distance_mpc"][()]
        cell = float(f.attrs["cell_mpc"])
        x_hi = f["history/x_hi"][()]
        tb = f["history/mean_tb_mK"][()]
        dawn = {k: f["history"][k][()] for k in ("mean_tk_K", "mean_ts_K", "mean_x_alpha")} \
            if "mean_ts_K" in f["history"] else None
        uv = {name: f["uv"][name][()] for name in f["uv"]} if "uv" in f else {}
        uv_freq = float(f["uv"].attrs["freq_MHz"]) if "uv" in f else None
        point = int(f.attrs["point"])
        real = int(f.attrs["realisation"])
    n_perp, _, n_los = cubes[0][1].shape
    mid = n_los // 2
    width = n_perp * cell
    rows = len(cubes) + 1 + (dawn is not None)
    fig = plt.figure(figsize=(15, 3.3 * rows))
    grid = fig.add_gridspec(rows, 2, width_ratios=[1, 3.2])
    for r, (name, cube) in enumerate(cubes):
        lim = max(np.percentile(np.abs(cube), 99.5), 1e-6)
        cmap = "magma" if name == "clean" else "RdBu_r"
        vmin = min(cube.min(), 0.0) if name == "clean" else -lim
        vmax = cube.max() if name == "clean" else lim
        ax = fig.add_subplot(grid[r, 0])
        im = ax.imshow(cube[:, :, mid].T, origin="lower", extent=[0, width, 0, width], cmap=cmap, vmin=vmin, vmax=vmax)
        ax.set_title(f"{name}: slice at {freq[mid]:.2f} MHz (z = {z[mid]:.2f})", fontsize=9)
        ax.set_xlabel("x [comoving Mpc]")
        ax.set_ylabel("y [comoving Mpc]")
        fig.colorbar(im, ax=ax, label="δT_b [mK]", fraction=0.046)
        ax = fig.add_subplot(grid[r, 1])
        # Frequency decreases along the LOS (cell 0 is the lowest redshift, highest frequency).
        im = ax.imshow(cube[n_perp // 2, :, :], origin="lower", aspect="auto", cmap=cmap, vmin=vmin, vmax=vmax,
                       extent=[freq[0], freq[-1], 0, width])
        ax.set_title(f"{name}: line-of-sight cut (distance {dist[0]:.0f}–{dist[-1]:.0f} Mpc)", fontsize=9)
        ax.set_xlabel("observed frequency [MHz]")
        ax.set_ylabel("y [comoving Mpc]")
        top = ax.secondary_xaxis("top", functions=(lambda nu: 1420.405751768 / nu - 1,
                                                   lambda zz: 1420.405751768 / (1 + zz)))
        top.set_xlabel("redshift")
        fig.colorbar(im, ax=ax, label="δT_b [mK]", fraction=0.02)
    if dawn is not None:
        dawn_panel(fig.add_subplot(grid[rows - 2, :]), z, x_hi, tb, dawn)
    hist = fig.add_subplot(grid[rows - 1, 1])
    hist.plot(z, x_hi, color="C0")
    hist.set_xlabel("redshift")
    hist.set_ylabel("neutral fraction x_HI", color="C0")
    hist.set_ylim(-0.02, 1.02)
    twin = hist.twinx()
    twin.plot(z, tb, color="C3")
    twin.set_ylabel("mean δT_b [mK]", color="C3")
    hist.set_title("global history of this cone", fontsize=9)
    ax = fig.add_subplot(grid[rows - 1, 0])
    if uv:
        name, t = next(iter(uv.items()))
        shifted = np.fft.fftshift(t)
        shown = np.where(shifted > 0, shifted / 3600.0, np.nan)
        im = ax.imshow(shown.T, origin="lower", cmap="viridis", norm=matplotlib.colors.LogNorm())
        ax.set_title(f"uv coverage of '{name}' at {uv_freq:.1f} MHz", fontsize=9)
        ax.set_xlabel("u cell")
        ax.set_ylabel("v cell")
        fig.colorbar(im, ax=ax, label="hours per uv cell", fraction=0.046)
    else:
        ax.axis("off")
        ax.text(0.0, 0.5, f"point {point}, realisation {real}\n{n_perp}×{n_perp}×{n_los} cells of {cell:g} Mpc",
                fontsize=10)
    fig.suptitle(f"spinflip cone: point {point}, realisation {real}")
    fig.tight_layout()
    fig.savefig(dst, dpi=110)


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


if __name__ == "__main__":
    if len(sys.argv) != 3:
        sys.exit("usage: plot_cone.py CONE.h5 OUT.png")
    main(sys.argv[1], sys.argv[2])
