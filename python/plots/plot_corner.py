"""Corner picture of a `spinflip fisher` output: 1σ and 2σ ellipses of every
parameter pair and the 1D marginals, one colour per selection.

usage: plot_corner.py FISHER.h5 OUT.png
Ellipses enclose Δχ² = 2.30 and 6.18, the 68.3% and 95.4% regions of a 2D
Gaussian (common practice; e.g. Coe 2009, "Fisher matrices and confidence ellipses").
"""
import sys

import h5py
import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402
from matplotlib.patches import Ellipse  # noqa: E402

DCHI2 = (2.30, 6.18)


def text(v):
    return v.decode() if isinstance(v, bytes) else str(v)


def ellipse(cov2, centre, dchi2, **kw):
    vals, vecs = np.linalg.eigh(cov2)
    angle = np.degrees(np.arctan2(vecs[1, 1], vecs[0, 1]))
    w, h = 2 * np.sqrt(dchi2 * vals[1]), 2 * np.sqrt(dchi2 * vals[0])
    return Ellipse(centre, w, h, angle=angle, fill=False, **kw)


def main(src, dst):
    with h5py.File(src, "r") as f:
        names = [text(s) for s in f.attrs["param_names"]]
        units = [text(s) for s in f.attrs["param_units"]]
        fid = np.asarray(f.attrs["fiducial"], float)
        sels = [text(s) for s in f.attrs["selections"]]
        covs = {s: f[s]["fisher_inverse"][()] for s in sels}
    p = len(names)
    colours = plt.rcParams["axes.prop_cycle"].by_key()["color"]
    fig, axes = plt.subplots(p, p, figsize=(2.6 * p + 1, 2.6 * p + 1), squeeze=False)
    # Frame the typical selection (median width), not the weakest: a selection that
    # constrains little runs off the panels instead of shrinking every other ellipse to a dot.
    span = np.median([np.sqrt(np.diag(c)) for c in covs.values()], axis=0) * 3.2
    label = [f"{n} [{u}]" if u else n for n, u in zip(names, units)]
    for i in range(p):
        for j in range(p):
            ax = axes[i, j]
            if j > i:
                ax.axis("off")
                continue
            for k, s in enumerate(sels):
                c = covs[s]
                col = colours[k % len(colours)]
                if i == j:
                    x = np.linspace(fid[i] - span[i], fid[i] + span[i], 300)
                    sd = np.sqrt(c[i, i])
                    ax.plot(x, np.exp(-0.5 * ((x - fid[i]) / sd) ** 2), color=col, label=s)
                    ax.set_yticks([])
                else:
                    sub = c[np.ix_([j, i], [j, i])]
                    for dchi2, ls in zip(DCHI2, ("-", "--")):
                        ax.add_patch(ellipse(sub, (fid[j], fid[i]), dchi2, edgecolor=col, ls=ls, lw=1.2))
            ax.set_xlim(fid[j] - span[j], fid[j] + span[j])
            if i != j:
                ax.set_ylim(fid[i] - span[i], fid[i] + span[i])
            if i == p - 1:
                ax.set_xlabel(label[j])
            else:
                ax.set_xticklabels([])
            if j == 0 and i != 0:
                ax.set_ylabel(label[i])
            elif i != j:
                ax.set_yticklabels([])
            ax.tick_params(labelsize=7)
    handles, labels = axes[0, 0].get_legend_handles_labels()
    handles += [plt.Line2D([], [], color="k", ls="-"), plt.Line2D([], [], color="k", ls="--")]
    labels += ["1σ (68.3%)", "2σ (95.4%)"]
    fig.legend(handles, labels, loc="upper right", fontsize=9, frameon=False)
    fig.suptitle("Fisher forecast: marginalised constraints", x=0.4)
    fig.savefig(dst, dpi=110, bbox_inches="tight")


if __name__ == "__main__":
    if len(sys.argv) != 3:
        sys.exit(__doc__)
    main(sys.argv[1], sys.argv[2])
