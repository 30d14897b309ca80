"""Read spinflip catalogues and analysis outputs into numpy arrays (h5py only).

    import spinflip_catalogue as sc
    cat = sc.open_catalogue("demo.h5")
    st = cat.stats("deep", "power")            # done entries only
    st.values.shape                             # (n_done, n_units, n_coeff)
    cat.entry_params[st.entries]                # their parameter vectors
    ts = sc.load_export("train.h5")
    x, y = ts.data("all", split="train"), ts.params_unit[ts.split == 0]

Layouts: docs/catalogue.md (catalogues) and docs/analysis.md (outputs).
"""
from dataclasses import dataclass, field

import h5py
import numpy as np

__all__ = ["open_catalogue", "Catalogue", "Stats", "load_export", "TrainingSet", "load_covariance",
           "load_fisher", "to_unit", "from_unit", "SPLITS"]

SPLITS = {"train": 0, "validation": 1, "test": 2}


def _text(v):
    if isinstance(v, bytes):
        return v.decode().rstrip("\x00 ")
    if isinstance(v, np.ndarray):
        return [_text(x) for x in v.tolist()]
    if isinstance(v, (list, tuple)):
        return [_text(x) for x in v]
    return v


def _attrs(obj):
    return {k: _text(v) for k, v in obj.attrs.items()}


def to_unit(values, lo, hi, log):
    """Physical → unit cube, in log10 space where `log` is true (as `spinflip export`)."""
    values, lo, hi, log = (np.asarray(a, float) for a in (values, lo, hi, log))
    lin = (values - lo) / (hi - lo)
    with np.errstate(divide="ignore", invalid="ignore"):
        lg = (np.log10(values) - np.log10(lo)) / (np.log10(hi) - np.log10(lo))
    return np.where(log.astype(bool), lg, lin)


def from_unit(u, lo, hi, log):
    """Unit cube → physical; the inverse of to_unit."""
    u, lo, hi, log = (np.asarray(a, float) for a in (u, lo, hi, log))
    lin = lo + u * (hi - lo)
    with np.errstate(divide="ignore", invalid="ignore"):
        lg = 10 ** (np.log10(lo) + u * (np.log10(hi) - np.log10(lo)))
    return np.where(log.astype(bool), lg, lin)


@dataclass
class Stats:
    """One /stats/<scenario>/<kernel> group restricted to some entries."""
    scenario: str
    kernel: str
    values: np.ndarray  # (n_selected_entries, n_units, n_coeff)
    entries: np.ndarray  # entry indices of the rows
    axes: dict  # axis name → (n_coeff,) array; "<axis>_by_unit" → (n_units, n_coeff) (observed scenarios)
    unit_freq_MHz: np.ndarray
    unit_z: np.ndarray
    attrs: dict = field(default_factory=dict)


class Catalogue:
    """A catalogue opened read-only; arrays are loaded eagerly except /stats values."""

    def __init__(self, path):
        self.path = path
        self._f = h5py.File(path, "r")
        f = self._f
        d = f["design"]
        self.param_names = _text(d["param_names"][()])
        n = len(self.param_names)
        self.param_units = _text(d["param_units"][()]) if "param_units" in d else [""] * n
        self.param_log = d["param_log"][()].astype(bool) if "param_log" in d else np.zeros(n, bool)
        self.param_min = d["param_min"][()] if "param_min" in d else None
        self.param_max = d["param_max"][()] if "param_max" in d else None
        self.param_fiducial = d["param_fiducial"][()] if "param_fiducial" in d else None
        self.points = d["points"][()]
        self.roles = np.array(_text(d["role"][()]))
        self.stencil_param = d["stencil_param"][()]
        self.stencil_step = d["stencil_step"][()]
        self.stencil_step_index = d["stencil_step_index"][()]
        self.seed_point = d["seed_point"][()]
        e = f["entries"]
        self.entry_point = e["point"][()]
        self.entry_realisation = e["realisation"][()]
        self.entry_status = e["status"][()]
        self.entry_params = e["params"][()] if "params" in e else self.points[self.entry_point]
        self.provenance = _attrs(f)

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        self.close()

    def close(self):
        self._f.close()

    def kernels(self):
        """[(scenario, kernel), …] of every group holding `values`, sorted."""
        out = []
        for s in sorted(self._f.get("stats", {})):
            for k in sorted(self._f["stats"][s]):
                if "values" in self._f["stats"][s][k]:
                    out.append((s, k))
        return out

    def done(self):
        """Indices of entries with status 1 (done)."""
        return np.flatnonzero(self.entry_status == 1)

    def entries_with_role(self, role, done_only=True):
        e = np.flatnonzero(self.roles[self.entry_point] == role)
        return e[self.entry_status[e] == 1] if done_only else e

    def stats(self, scenario, kernel, entries=None):
        """Values of the given entries (default: every done entry) and the axes."""
        try:
            g = self._f["stats"][scenario][kernel]
        except KeyError:
            raise KeyError(f"{self.path}: no /stats/{scenario}/{kernel}; available: {self.kernels()}") from None
        entries = self.done() if entries is None else np.asarray(entries)
        values = g["values"][np.sort(entries)] if len(entries) else np.empty((0,) + g["values"].shape[1:])
        order = np.argsort(np.argsort(entries)) if len(entries) else entries
        axes = {k: g[k][()] for k in g if k not in ("values", "unit_freq_MHz", "unit_z")}
        return Stats(scenario, kernel, values[order], entries, axes,
                     g["unit_freq_MHz"][()] if "unit_freq_MHz" in g else None,
                     g["unit_z"][()] if "unit_z" in g else None, _attrs(g))


def open_catalogue(path):
    return Catalogue(path)


class TrainingSet:
    """A `spinflip export` file."""

    def __init__(self, path):
        with h5py.File(path, "r") as f:
            self.attrs = _attrs(f)
            self.provenance = _attrs(f["provenance"]) if "provenance" in f else {}
            p = f["params"]
            self.param_names = _text(p["names"][()])
            self.param_units = _text(p["units"][()])
            self.param_log = p["log"][()].astype(bool)
            self.param_min, self.param_max = p["min"][()], p["max"][()]
            self.params = p["physical"][()]
            self.params_unit = p["unit_cube"][()]
            self.entry = f["entry"][()]
            self.point = f["point"][()]
            self.realisation = f["realisation"][()]
            self.split = f["split"][()]
            self.selections = {}
            for name in _text(f.attrs["selections"]):
                g = f[name]
                sel = {k: g[k][()] for k in ("data", "data_normalised", "norm_mean", "norm_std")}
                sel["labels"] = _text(g["selection/label"][()])
                sel["record"] = _text(g["selection"].attrs["record"])
                if "score" in g:
                    sel["score"] = g["score/t"][()]
                    sel["theta_mle"] = g["score/theta_mle"][()]
                self.selections[name] = sel

    def data(self, selection, split=None, normalised=False):
        x = self.selections[selection]["data_normalised" if normalised else "data"]
        return x if split is None else x[self.split == SPLITS[split]]


def load_export(path):
    return TrainingSet(path)


def load_covariance(path):
    """{selection: {mean, cov, corr, std, precision?, labels, attrs}} of a `spinflip covariance` file."""
    out = {}
    with h5py.File(path, "r") as f:
        for name in _text(f.attrs["selections"]):
            g = f[name]
            d = {k: g[k][()] for k in g if isinstance(g[k], h5py.Dataset)}
            d["labels"] = _text(g["selection/label"][()])
            d["attrs"] = _attrs(g)
            out[name] = d
    return out


def load_fisher(path):
    """{'param_names', 'param_units', 'fiducial', 'selections': {name: {fisher, fisher_inverse, sigma_marginal, …}}}."""
    with h5py.File(path, "r") as f:
        out = {"param_names": _text(f.attrs["param_names"]), "param_units": _text(f.attrs["param_units"]),
               "fiducial": np.asarray(f.attrs["fiducial"]), "selections": {}}
        for name in _text(f.attrs["selections"]):
            g = f[name]
            d = {k: g[k][()] for k in g if isinstance(g[k], h5py.Dataset)}
            d["attrs"] = _attrs(g)
            d["convergence"] = {k: g["convergence"][k][()] for k in g["convergence"]}
            d["convergence"]["labels"] = _text(d["convergence"]["labels"])
            if "combined" in g:
                d["combined"] = {k: g["combined"][k][()] for k in g["combined"]}
            out["selections"][name] = d
    return out
