"""Draw the data file that `spinflip plot` writes: one panel per coefficient
(against redshift, observed frequency on the top axis) or per family of
coefficients (against k or j at one redshift); in each panel one line per entry
coloured by a parameter, or the fiducial mean with a ±1σ band; scenarios are
told apart by line style (design) or colour (fiducial).

usage: plot_statistic.py DATA.h5 OUT FORMAT      (FORMAT: png or pdf)
The picture is drawn to OUT.partial and renamed, so OUT is never half written.
"""
import math
import os
import sys

import h5py
import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402

NU21_MHZ = 1420.405751768  # rest frequency of the 21-cm line
STYLES = ["-", "--", ":", "-."]


def text(v):
    return v.decode() if isinstance(v, bytes) else str(v)


def z_to_nu(z):
    with np.errstate(divide="ignore", invalid="ignore"):
        return NU21_MHZ / (1 + np.asarray(z, float))


def nu_to_z(nu):
    with np.errstate(divide="ignore", invalid="ignore"):  # matplotlib probes the inverse at 0 too
        return NU21_MHZ / np.asarray(nu, float) - 1


def plain_log_ticks(axis):
    """Decimal labels (0.2, 0.5, 1) on a log axis instead of 2×10⁻¹."""
    axis.set_major_locator(matplotlib.ticker.LogLocator(subs=(1.0, 2.0, 3.0, 5.0)))
    axis.set_major_formatter(matplotlib.ticker.FuncFormatter(lambda v, _: f"{v:g}"))
    axis.set_minor_formatter(matplotlib.ticker.NullFormatter())


def pretty(label):
    """Units as the files write them (mK^2 Mpc^3) as a reader expects them (mK² Mpc³)."""
    for a, b in (("^-1", "⁻¹"), ("^2", "²"), ("^3", "³"), ("^4", "⁴"), ("^6", "⁶")):
        label = label.replace(a, b)
    return label


def frequency_axis(ax):
    top = ax.secondary_xaxis("top", functions=(z_to_nu, nu_to_z))
    top.set_xlabel("observed frequency [MHz]", fontsize=8)
    top.tick_params(labelsize=7)


def main(src, dst, fmt):
    with h5py.File(src, "r") as f:
        a = {k: (text(v) if isinstance(v, (bytes, str)) else v) for k, v in f.attrs.items()}
        values = f["values"][()]
        colour = f["colour"][()]
        panel = f["element_panel"][()]
        series = [text(s) for s in f["element_series"][()]]
        x = f["element_x"][()]
        titles = [text(s) for s in f["panel_title"][()]]
        xlabels = [text(s) for s in f["panel_xlabel"][()]]
        ylabels = [text(s) for s in f["panel_ylabel"][()]]
        xlog = f["panel_xlog"][()]
    fiducial = a["mode"] == "fiducial"
    against_z = a["against"] == "z"
    names = list(dict.fromkeys(series))  # scenarios, in selection order
    n = len(titles)
    cols = 2 if n == 4 else min(3, n)
    rows = math.ceil(n / cols)
    height = 3.5 * rows + 1.5
    fig, axes = plt.subplots(rows, cols, figsize=(4.8 * cols + 1.4, height), squeeze=False)
    # Margins in inches, so one row and four rows both leave room for the titles and the legend.
    fig.subplots_adjust(left=0.8 / fig.get_figwidth(), right=0.97 if fiducial else 1 - 1.0 / fig.get_figwidth(),
                        bottom=1.0 / height, top=1 - (1.25 if against_z else 0.95) / height,
                        hspace=0.85 if against_z else 0.5, wspace=0.35)
    if not fiducial:
        positive = colour[colour > 0]
        log = int(a.get("colour_log", 0)) == 1 and positive.size == colour.size
        norm = (matplotlib.colors.LogNorm if log else matplotlib.colors.Normalize)(colour.min(), colour.max())
        cmap = plt.get_cmap("viridis")
    for p in range(rows * cols):
        ax = axes.flat[p]
        if p >= n:
            ax.axis("off")
            continue
        empty = True
        for s_i, name in enumerate(names):
            cols_ = np.flatnonzero((panel == p) & (np.array(series) == name))
            if cols_.size == 0:
                continue
            order = cols_[np.argsort(x[cols_])]
            xs = x[order]
            y = values[:, order]
            if np.isfinite(y).any():
                empty = False
            if fiducial:
                col = f"C{s_i}"
                mean = np.nanmean(y, axis=0) if np.isfinite(y).any() else np.full(len(xs), np.nan)
                ax.plot(xs, mean, color=col, marker="o", ms=3, lw=1.5, label=f"{name}: mean")
                if y.shape[0] > 1:
                    sd = np.nanstd(y, axis=0, ddof=1)  # sample standard deviation of the realisations
                    ax.fill_between(xs, mean - sd, mean + sd, color=col, alpha=0.25, lw=0, label=f"{name}: ±1σ")
                    if len(xs) == 1:  # a band of one point is invisible: an error bar instead
                        ax.errorbar(xs, mean, yerr=sd, color=col, capsize=4, lw=1.2)
            else:
                for e in range(y.shape[0]):
                    ax.plot(xs, y[e], color=cmap(norm(colour[e])), ls=STYLES[s_i % len(STYLES)], lw=1.1,
                            marker="o" if len(xs) < 4 else None, ms=2.5, alpha=0.9)
        if empty:
            ax.text(0.5, 0.5, "no measured value\n(every mode removed)", transform=ax.transAxes, ha="center",
                    va="center", fontsize=8, color="0.4")
        if xlog[p]:
            ax.set_xscale("log")
            plain_log_ticks(ax.xaxis)
        # Spectra span decades (and a noise bias sits far above the signal): a log axis when
        # the positive values span more than two decades; zeros (nothing left to measure) are masked.
        finite = values[:, panel == p]
        finite = finite[np.isfinite(finite) & (finite > 0)]
        if finite.size and (values[:, panel == p][np.isfinite(values[:, panel == p])] >= 0).all() \
                and finite.max() / finite.min() > 100:
            ax.set_yscale("log", nonpositive="mask")
        if xlabels[p].startswith("j"):  # wavelet scales are whole numbers
            lo, hi = np.nanmin(x[panel == p]), np.nanmax(x[panel == p])
            ax.set_xticks(np.arange(np.ceil(lo), np.floor(hi) + 1))
            ax.set_xlim(lo - 0.5, hi + 0.5)
        ax.set_title(titles[p], fontsize=8.5)
        ax.set_xlabel(xlabels[p], fontsize=8)
        ax.set_ylabel(pretty(ylabels[p]), fontsize=8)
        ax.tick_params(labelsize=7)
        ax.grid(alpha=0.25, lw=0.5)
        if against_z:
            frequency_axis(ax)
    if fiducial:
        handles, labels = axes.flat[0].get_legend_handles_labels()
        fig.legend(handles, labels, loc="lower center", ncol=min(4, len(labels)), fontsize=8, frameon=False,
                   bbox_to_anchor=(0.5, 0.0))
    else:
        sm = matplotlib.cm.ScalarMappable(norm=norm, cmap=cmap)
        cb = fig.colorbar(sm, ax=axes.ravel().tolist(), fraction=0.03, pad=0.02)
        label = a.get("colour_label", "")
        cb.set_label(label, fontsize=10, rotation=0 if len(label) <= 3 else 90, labelpad=10)
        if log:
            plain_log_ticks(cb.ax.yaxis)
        if len(names) > 1:
            handles = [plt.Line2D([], [], color="k", ls=STYLES[i % len(STYLES)]) for i in range(len(names))]
            fig.legend(handles, [f"scenario {s}" for s in names], loc="lower center", ncol=len(names), fontsize=8,
                       frameon=False)
        else:
            fig.text(0.01, 0.01, f"scenario {names[0]}", fontsize=8)
    fig.suptitle(f"{a['title']}\nselection: {a['select']}", fontsize=9.5)
    partial = dst + ".partial"
    fig.savefig(partial, format=fmt, dpi=120)
    os.replace(partial, dst)


if __name__ == "__main__":
    if len(sys.argv) != 4 or sys.argv[3] not in ("png", "pdf"):
        sys.exit(__doc__)
    main(*sys.argv[1:])
