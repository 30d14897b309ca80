"""Correlation-matrix picture of a `spinflip covariance` output.

usage: plot_correlation.py COV.h5 OUT.png
One panel per selection; tick marks separate the scenario/kernel blocks.
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


def main(src, dst):
    with h5py.File(src, "r") as f:
        names = [text(s) for s in f.attrs["selections"]]
        n = len(names)
        fig, axes = plt.subplots(1, n, figsize=(5.2 * n, 4.6), squeeze=False)
        for ax, name in zip(axes[0], names):
            g = f[name]
            corr = g["corr"][()]
            im = ax.imshow(corr, vmin=-1, vmax=1, cmap="RdBu_r", interpolation="nearest")
            blocks = [f"{text(s)}/{text(k)}" for s, k in zip(g["selection/scenario"][()], g["selection/kernel"][()])]
            edges = [i for i in range(1, len(blocks)) if blocks[i] != blocks[i - 1]]
            for e in edges:
                ax.axhline(e - 0.5, color="k", lw=0.6)
                ax.axvline(e - 0.5, color="k", lw=0.6)
            starts = [0] + edges
            ax.set_xticks(starts)
            ax.set_xticklabels([blocks[s] for s in starts], rotation=60, ha="right", fontsize=7)
            ax.set_yticks(starts)
            ax.set_yticklabels([blocks[s] for s in starts], fontsize=7)
            ax.set_title(f"{name}\n{g.attrs['n_data']} coefficients, {g.attrs['n_realisations']} realisations, "
                         f"cond {g.attrs['condition_number']:.3g}", fontsize=8)
        fig.colorbar(im, ax=axes[0].tolist(), shrink=0.8, label="correlation")
        fig.savefig(dst, dpi=110, bbox_inches="tight")


if __name__ == "__main__":
    if len(sys.argv) != 3:
        sys.exit(__doc__)
    main(sys.argv[1], sys.argv[2])
