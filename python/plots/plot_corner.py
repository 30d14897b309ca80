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


def axis_label(label, unit, log):
    """The campaign's label in Fisher coordinates: "log₁₀ ζ", "log₁₀(T_vir,min / K)"."""
    name, bracket = label, ""
    if label.endswith("]") and " [" in label:
        name, bracket = label[:-1].split(" [", 1)
    if not log:
        return label if bracket or not unit else f"{label} [{unit}]"
    u = bracket or unit
    return f"log₁₀({name} / {u})" if u else f"log₁₀ {name}"


def notes_of(sel, g, label):
    """Lines saying when a shrunk covariance or a failed convergence check is involved."""
    out = []
    if text(g.attrs.get("shrinkage", "none")) != "none":
        out.append(f"{sel}: Ledoit-Wolf shrunk covariance (no Hartlap factor)")
    if "convergence" in g:
        c = g["convergence"]
        labels = [text(s) for s in c["labels"][()]]
        flagged, ratio = c["flagged"][()], c["ratio"][()]
        for i, j in zip(*np.nonzero(flagged)):
            out.append(f"{sel}: convergence check failed: {labels[i]} moves σ({label[j]}) by "
                       f"{100 * (ratio[i, j] - 1):+.0f}%")
    return out


def main(src, dst):
    with h5py.File(src, "r") as f:
        names = [text(s) for s in f.attrs["param_names"]]
        units = [text(s) for s in f.attrs["param_units"]]
        labels = [text(s) for s in f.attrs["param_labels"]] if "param_labels" in f.attrs else names
        logs = list(f.attrs["param_log"]) if "param_log" in f.attrs else [0] * len(names)
        fid = np.asarray(f.attrs["fiducial"], float)
        sels = [text(s) for s in f.attrs["selections"]]
        covs = {s: f[s]["fisher_inverse"][()] for s in sels}
        # Units of log parameters are written "log10(K)" in the file: the label carries the unit instead.
        plain_units = [u[6:-1] if u.startswith("log10(") and u.endswith(")") else u for u in units]
        label = [axis_label(lb, u, lg) for lb, u, lg in zip(labels, plain_units, logs)]
        notes = [n for s in sels for n in notes_of(s, f[s], label)]
    p = len(names)
    colours = plt.rcParams["axes.prop_cycle"].by_key()["color"]
    fig, axes = plt.subplots(p, p, figsize=(2.9 * p + 1.2, 2.9 * p + 1.2), squeeze=False)
    # Frame the tightest selection (its 2σ region with a margin), not the weakest: a selection
    # that constrains little runs off the panels instead of shrinking every other ellipse to a dot.
    span = np.min([np.sqrt(np.diag(c)) for c in covs.values()], axis=0) * 3.5
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
                    ax.set_ylim(0, 1.08)
                else:
                    sub = c[np.ix_([j, i], [j, i])]
                    for dchi2, ls in zip(DCHI2, ("-", "--")):
                        ax.add_patch(ellipse(sub, (fid[j], fid[i]), dchi2, edgecolor=col, ls=ls, lw=1.2))
            if i == j:
                ax.axvline(fid[i], color="0.3", lw=0.8, ls=":")
                sig = ", ".join(f"{np.sqrt(covs[s][i, i]):.3g}" for s in sels)
                ax.set_title(f"{label[i]}\nσ = {sig}", fontsize=8)
            else:
                ax.plot(fid[j], fid[i], marker="+", color="k", ms=9, mew=1.2)
            ax.set_xlim(fid[j] - span[j], fid[j] + span[j])
            if i != j:
                ax.set_ylim(fid[i] - span[i], fid[i] + span[i])
            if i == p - 1:
                ax.set_xlabel(label[j], fontsize=9)
            else:
                ax.set_xticklabels([])
            if j == 0 and i != 0:
                ax.set_ylabel(label[i], fontsize=9)
            elif i != j:
                ax.set_yticklabels([])
            ax.tick_params(labelsize=7)
    handles, hl = axes[0, 0].get_legend_handles_labels()
    handles += [plt.Line2D([], [], color="k", ls="-"), plt.Line2D([], [], color="k", ls="--"),
                plt.Line2D([], [], color="k", marker="+", ls="none", ms=9)]
    hl += ["1σ (68.3%)", "2σ (95.4%)", "fiducial"]
    fig.legend(handles, hl, loc="upper right", fontsize=9, frameon=False, title="selection (σ in that order)",
               title_fontsize=8)
    fig.suptitle("Fisher forecast: marginalised constraints", x=0.4)
    if notes:
        shown = notes[:6] + ([f"… and {len(notes) - 6} more (see the fisher output)"] if len(notes) > 6 else [])
        fig.text(0.02, -0.01, "\n".join(shown), fontsize=7.5, color="firebrick", va="top")
    fig.savefig(dst, dpi=110, bbox_inches="tight")


if __name__ == "__main__":
    if len(sys.argv) != 3:
        sys.exit(__doc__)
    main(sys.argv[1], sys.argv[2])
