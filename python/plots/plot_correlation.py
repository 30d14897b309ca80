"""Correlation-matrix picture of a `spinflip covariance` output.

usage: plot_correlation.py COV.h5 OUT.png
One panel per selection. Thick lines separate the scenario/kernel blocks, named
on the top and right edges; thin lines separate the units (slices or chunks)
inside a block, whose redshifts label the bottom and left edges.
Called by the covariance verb; runnable by hand the same way.
"""
import sys

import h5py
import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402


def text(v):
    return v.decode() if isinstance(v, bytes) else str(v)


def runs(keys):
    """[(start, stop, key)] of the runs of equal consecutive keys."""
    out, start = [], 0
    for i in range(1, len(keys) + 1):
        if i == len(keys) or keys[i] != keys[start]:
            out.append((start, i, keys[start]))
            start = i
    return out


def thin(ticks, labels, most=24):
    step = max(1, int(np.ceil(len(ticks) / most)))
    return ticks[::step], labels[::step]


def panel(ax, g, name):
    corr = g["corr"][()]
    s = g["selection"]
    blocks = [f"{text(a)}/{text(b)}" for a, b in zip(s["scenario"][()], s["kernel"][()])]
    z = s["unit_z"][()]
    im = ax.imshow(corr, vmin=-1, vmax=1, cmap="RdBu_r", interpolation="nearest")
    block_runs = runs(blocks)
    unit_runs = runs([(b, round(float(zz), 6)) for b, zz in zip(blocks, z)])
    for start, _, _ in unit_runs[1:]:
        ax.axhline(start - 0.5, color="0.35", lw=0.3)
        ax.axvline(start - 0.5, color="0.35", lw=0.3)
    for start, _, _ in block_runs[1:]:
        ax.axhline(start - 0.5, color="k", lw=1.4)
        ax.axvline(start - 0.5, color="k", lw=1.4)
    centres = np.array([(a + b - 1) / 2 for a, b, _ in unit_runs])
    zlabels = [f"{key[1]:.2f}" if np.isfinite(key[1]) else "–" for _, _, key in unit_runs]
    ticks, labels = thin(centres, zlabels)
    ax.set_xticks(ticks)
    ax.set_xticklabels(labels, rotation=90, fontsize=6.5)
    ax.set_yticks(ticks)
    ax.set_yticklabels(labels, fontsize=6.5)
    ax.set_xlabel("unit redshift z (each thin box: one unit)", fontsize=8)
    ax.set_ylabel("unit redshift z", fontsize=8)
    bc = [(a + b - 1) / 2 for a, b, _ in block_runs]
    bl = [key for _, _, key in block_runs]
    top = ax.secondary_xaxis("top")
    top.set_xticks(bc)
    top.set_xticklabels(bl, fontsize=7.5)
    right = ax.secondary_yaxis("right")
    right.set_yticks(bc)
    right.set_yticklabels(bl, fontsize=7.5, rotation=90, va="center")
    ax.set_title(f"{name}\n{g.attrs['n_data']} coefficients, {g.attrs['n_realisations']} realisations, "
                 f"condition number {g.attrs['condition_number']:.3g}", fontsize=8.5, pad=20)
    return im


def main(src, dst):
    with h5py.File(src, "r") as f:
        names = [text(s) for s in f.attrs["selections"]]
        n = len(names)
        fig, axes = plt.subplots(1, n, figsize=(6.2 * n + 0.8, 5.8), squeeze=False, gridspec_kw={"wspace": 0.45})
        for ax, name in zip(axes[0], names):
            im = panel(ax, f[name], name)
        fig.colorbar(im, ax=axes[0].tolist(), shrink=0.8, pad=0.06, label="correlation coefficient")
        fig.savefig(dst, dpi=110, bbox_inches="tight")


if __name__ == "__main__":
    if len(sys.argv) != 3:
        sys.exit(__doc__)
    main(sys.argv[1], sys.argv[2])
