"""Read spinflip catalogues and analysis outputs into numpy arrays (h5py only;
xarray DataArrays from `select` when xarray is installed).

    import spinflip_catalogue as sc
    cat = sc.open_catalogue("demo.h5")
    d2 = cat.select("deep", "power", role="training", z=8.5, quantity="delta2")
    d2.values, d2.coords["k_mean"]              # Δ²(k) of every done training entry at z ≈ 8.5
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

__all__ = ["open_catalogue", "Catalogue", "Stats", "Selected", "SpinflipFileError", "load_export", "TrainingSet",
           "load_covariance", "load_fisher", "to_unit", "from_unit", "SPLITS"]


class SpinflipFileError(ValueError):
    """A file is not (or not yet, or no longer wholly) what a spinflip reader expects."""


def _open(path, what):
    try:
        return h5py.File(path, "r")
    except FileNotFoundError:
        raise SpinflipFileError(f"{path}: no such file") from None
    except OSError as e:
        raise SpinflipFileError(f"{path}: cannot be opened as HDF5 ({e}); is it a {what}?") from None


def _need(f, key, path, what):
    """f[key], or a SpinflipFileError saying what is missing and why that may be."""
    try:
        return f[key]
    except KeyError:
        raise SpinflipFileError(f"{path}: no '{f.name.rstrip('/')}/{key}' — not a {what}, or one whose writing was interrupted "
                                f"(a partial file)") from None


def _need_attr(obj, name, path, what):
    try:
        return obj.attrs[name]
    except KeyError:
        raise SpinflipFileError(f"{path}: no attribute '{name}' on '{obj.name}' — not a {what}, or a partial "
                                f"file") from None

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


@dataclass
class Selected:
    """Values picked by Catalogue.select with their coordinates.

    dims names the axes of `values` ("entry", then "unit" unless one redshift
    was asked, then "coefficient"); coords maps a name to (dim, array) — or,
    for `params`, ("entry", "parameter") and an (n_entries, n_params) array.
    """
    values: np.ndarray
    dims: tuple
    coords: dict
    attrs: dict = field(default_factory=dict)

    @property
    def shape(self):
        return self.values.shape

    def coord(self, name):
        return self.coords[name][1]

    def to_xarray(self):
        """The same as an xarray.DataArray (ImportError when xarray is missing)."""
        import xarray as xr
        coords = {k: (d, v) for k, (d, v) in self.coords.items()}
        return xr.DataArray(self.values, dims=self.dims, coords=coords, attrs=self.attrs,
                            name=f"{self.attrs.get('scenario')}/{self.attrs.get('kernel')}")


def _filter(values, want, what):
    """Mask of `values` accepted by want: a number, a list of numbers, or a (lo, hi) range (None: open)."""
    values = np.asarray(values, float)
    if isinstance(want, tuple) and len(want) == 2:
        lo, hi = want
        return (values >= (-np.inf if lo is None else lo)) & (values <= (np.inf if hi is None else hi))
    wanted = np.atleast_1d(np.asarray(want, float))
    if wanted.size == 0:
        raise ValueError(f"{what}: an empty list selects nothing")
    return np.isclose(values[:, None], wanted[None, :], rtol=1e-9, atol=0).any(axis=1)


class Catalogue:
    """A catalogue opened read-only; arrays are loaded eagerly except /stats values.

    A catalogue still being written opens too (pending entries have status 0 and
    NaN values); a file that is not a catalogue raises SpinflipFileError."""

    WHAT = "spinflip catalogue"

    def __init__(self, path):
        self.path = path
        self._f = _open(path, self.WHAT)
        try:
            self._read()
        except BaseException:
            self._f.close()
            raise

    def _read(self):
        f, path, what = self._f, self.path, self.WHAT
        d = _need(f, "design", path, what)
        self.param_names = _text(_need(d, "param_names", path, what)[()])
        n = len(self.param_names)
        self.param_units = _text(d["param_units"][()]) if "param_units" in d else [""] * n
        self.param_labels = _text(d["param_labels"][()]) if "param_labels" in d else list(self.param_names)
        self.param_log = d["param_log"][()].astype(bool) if "param_log" in d else np.zeros(n, bool)
        self.param_min = d["param_min"][()] if "param_min" in d else None
        self.param_max = d["param_max"][()] if "param_max" in d else None
        self.param_fiducial = d["param_fiducial"][()] if "param_fiducial" in d else None
        self.points = _need(d, "points", path, what)[()]
        self.roles = np.array(_text(_need(d, "role", path, what)[()]))
        self.stencil_param = d["stencil_param"][()] if "stencil_param" in d else np.full(len(self.roles), -1)
        self.stencil_step = d["stencil_step"][()] if "stencil_step" in d else np.zeros(len(self.roles))
        self.stencil_step_index = d["stencil_step_index"][()] if "stencil_step_index" in d else np.full(len(self.roles), -1)
        self.seed_point = d["seed_point"][()] if "seed_point" in d else np.arange(len(self.roles))
        e = _need(f, "entries", path, what)
        self.entry_point = _need(e, "point", path, what)[()]
        self.entry_realisation = _need(e, "realisation", path, what)[()]
        self.entry_status = _need(e, "status", path, what)[()]
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
        roles = [role] if isinstance(role, str) else list(role)
        e = np.flatnonzero(np.isin(self.roles[self.entry_point], roles))
        return e[self.entry_status[e] == 1] if done_only else e

    def _group(self, scenario, kernel):
        try:
            return self._f["stats"][scenario][kernel]
        except KeyError:
            avail = ", ".join(f"{s}/{k}" for s, k in self.kernels())
            raise SpinflipFileError(f"{self.path}: no /stats/{scenario}/{kernel}; available: {avail}") from None

    def stats(self, scenario, kernel, entries=None):
        """Values of the given entries (default: every done entry) and the axes."""
        g = self._group(scenario, kernel)
        entries = self.done() if entries is None else np.asarray(entries)
        values = g["values"][np.sort(entries)] if len(entries) else np.empty((0,) + g["values"].shape[1:])
        order = np.argsort(np.argsort(entries)) if len(entries) else entries
        axes = {k: g[k][()] for k in g if k not in ("values", "unit_freq_MHz", "unit_z")}
        return Stats(scenario, kernel, values[order], entries, axes,
                     g["unit_freq_MHz"][()] if "unit_freq_MHz" in g else None,
                     g["unit_z"][()] if "unit_z" in g else None, _attrs(g))

    def select(self, scenario, kernel, role=None, z=None, quantity=None, done_only=True, as_xarray=None, **axes):
        """Values of one kernel with their coordinates.

        role: a role or list of roles (training, fiducial, stencil+, stencil-, list); None: every role.
        z: a number picks the unit nearest that redshift (the unit dimension is dropped);
           (lo, hi) keeps the units in that range; None keeps every unit.
        quantity: a name from the group's quantity_names ("power", "delta2", "variance", …) or its number.
        axes: any coefficient axis = a value, a list of values or a (lo, hi) range, e.g. order=1, j1=(0, 2).
        Returns an xarray.DataArray when xarray is importable (as_xarray=None) or asked (True), else Selected.
        Only done entries unless done_only=False (pending rows are NaN)."""
        g = self._group(scenario, kernel)
        attrs = _attrs(g)
        if role is None:
            entries = self.done() if done_only else np.arange(len(self.entry_status))
        else:
            roles = [role] if isinstance(role, str) else list(role)
            unknown = sorted(set(roles) - set(self.roles.tolist()))
            if unknown:
                raise ValueError(f"role {unknown} is not in {self.path} (roles: {sorted(set(self.roles.tolist()))})")
            entries = self.entries_with_role(roles, done_only)
        uz = g["unit_z"][()] if "unit_z" in g else np.full(g["values"].shape[1], np.nan)
        uf = g["unit_freq_MHz"][()] if "unit_freq_MHz" in g else np.full(g["values"].shape[1], np.nan)
        units = np.arange(len(uz))
        scalar_z = z is not None and np.ndim(z) == 0 and not isinstance(z, tuple)
        if scalar_z:
            if not np.isfinite(uz).any():
                raise ValueError(f"/stats/{scenario}/{kernel} has no unit_z to pick z = {z} from")
            units = np.array([int(np.nanargmin(np.abs(uz - float(z))))])
        elif z is not None:
            units = units[_filter(uz, z, "z")]
        axis_names = [k for k in g if k not in ("values", "unit_freq_MHz", "unit_z", "unit_index")
                      and isinstance(g[k], h5py.Dataset) and g[k].shape == (g["values"].shape[-1],)]
        ax = {k: g[k][()] for k in axis_names}
        keep = np.ones(g["values"].shape[-1], bool)
        if quantity is not None:
            if "quantity" not in ax:
                raise ValueError(f"/stats/{scenario}/{kernel} has no quantity axis")
            names = _text(g.attrs.get("quantity_names", []))
            names = [names] if isinstance(names, str) else list(names)
            if isinstance(quantity, str):
                if quantity not in names:
                    raise ValueError(f"quantity '{quantity}' is not one of {names} in /stats/{scenario}/{kernel}")
                quantity = names.index(quantity)
            keep &= ax["quantity"] == int(quantity)
        for name, want in axes.items():
            if name not in ax:
                raise ValueError(f"'{name}' is not a coefficient axis of /stats/{scenario}/{kernel} "
                                 f"(axes: {', '.join(sorted(ax))})")
            keep &= _filter(ax[name], want, name)
        coeff = np.flatnonzero(keep)
        if len(entries):
            raw = g["values"][np.sort(entries)]
            raw = raw[np.argsort(np.argsort(entries))]
        else:
            raw = np.empty((0,) + g["values"].shape[1:])
        values = raw[:, units][:, :, coeff]
        coords = {"entry": ("entry", np.asarray(entries)),
                  "point": ("entry", self.entry_point[entries]),
                  "realisation": ("entry", self.entry_realisation[entries]),
                  "role": ("entry", self.roles[self.entry_point[entries]]),
                  "params": (("entry", "parameter"), self.entry_params[entries]),
                  "parameter": ("parameter", np.array(self.param_names))}
        for i, name in enumerate(self.param_names):
            if name not in ax:
                coords[name] = ("entry", self.entry_params[entries, i])
        coords["coefficient"] = ("coefficient", coeff)
        for k, v in ax.items():
            coords[k] = ("coefficient", v[coeff])
        if scalar_z:
            values = values[:, 0, :]
            dims = ("entry", "coefficient")
            coords["z"] = ((), uz[units[0]])
            coords["freq_MHz"] = ((), uf[units[0]])
        else:
            dims = ("entry", "unit", "coefficient")
            coords["unit"] = ("unit", units)
            coords["z"] = ("unit", uz[units])
            coords["freq_MHz"] = ("unit", uf[units])
        out_attrs = {"scenario": scenario, "kernel": kernel, "catalogue": str(self.path)}
        for k in ("units", "description"):
            if k in g["values"].attrs:
                out_attrs[k] = _text(g["values"].attrs[k])
        sel = Selected(values, dims, coords, out_attrs)
        if as_xarray is False:
            return sel
        try:
            return sel.to_xarray()
        except ImportError:
            if as_xarray:
                raise
            return sel


def open_catalogue(path):
    return Catalogue(path)


class TrainingSet:
    """A `spinflip export` file."""

    WHAT = "spinflip export (training set) file"

    def __init__(self, path):
        what = self.WHAT
        with _open(path, what) as f:
            self.attrs = _attrs(f)
            self.provenance = _attrs(f["provenance"]) if "provenance" in f else {}
            p = _need(f, "params", path, what)
            self.param_names = _text(_need(p, "names", path, what)[()])
            self.param_units = _text(p["units"][()]) if "units" in p else [""] * len(self.param_names)
            self.param_log = _need(p, "log", path, what)[()].astype(bool)
            self.param_min, self.param_max = _need(p, "min", path, what)[()], _need(p, "max", path, what)[()]
            self.params = _need(p, "physical", path, what)[()]
            self.params_unit = _need(p, "unit_cube", path, what)[()]
            self.entry = _need(f, "entry", path, what)[()]
            self.point = _need(f, "point", path, what)[()]
            self.realisation = _need(f, "realisation", path, what)[()]
            self.split = _need(f, "split", path, what)[()]
            self.selections = {}
            for name in _text(_need_attr(f, "selections", path, what)):
                g = _need(f, name, path, what)
                sel = {k: _need(g, k, path, what)[()] for k in ("data", "data_normalised", "norm_mean", "norm_std")}
                sel["labels"] = _text(_need(g, "selection/label", path, what)[()])
                sel["record"] = _text(_need_attr(g["selection"], "record", path, what))
                if "score" in g:
                    sel["score"] = _need(g, "score/t", path, what)[()]
                    sel["theta_mle"] = _need(g, "score/theta_mle", path, what)[()]
                self.selections[name] = sel

    def data(self, selection, split=None, normalised=False):
        if selection not in self.selections:
            raise ValueError(f"no selection '{selection}' in this export (selections: {list(self.selections)})")
        x = self.selections[selection]["data_normalised" if normalised else "data"]
        return x if split is None else x[self.split == SPLITS[split]]


def load_export(path):
    return TrainingSet(path)


def _datasets(g):
    return {k: g[k][()] for k in g if isinstance(g[k], h5py.Dataset)}


def load_covariance(path):
    """{selection: {mean, cov, corr, std, precision?, labels, attrs}} of a `spinflip covariance` file."""
    what = "spinflip covariance file"
    out = {}
    with _open(path, what) as f:
        for name in _text(_need_attr(f, "selections", path, what)):
            g = _need(f, name, path, what)
            d = _datasets(g)
            d["labels"] = _text(_need(g, "selection/label", path, what)[()])
            d["attrs"] = _attrs(g)
            out[name] = d
    return out


def load_fisher(path):
    """{'param_names', 'param_units', 'fiducial', 'selections': {name: {fisher, fisher_inverse, sigma_marginal, …}}}."""
    what = "spinflip fisher file"
    with _open(path, what) as f:
        out = {"param_names": _text(_need_attr(f, "param_names", path, what)),
               "param_units": _text(_need_attr(f, "param_units", path, what)),
               "fiducial": np.asarray(_need_attr(f, "fiducial", path, what)), "selections": {}}
        if "param_labels" in f.attrs:
            out["param_labels"] = _text(f.attrs["param_labels"])
        for name in _text(_need_attr(f, "selections", path, what)):
            g = _need(f, name, path, what)
            d = _datasets(g)
            d["attrs"] = _attrs(g)
            c = _need(g, "convergence", path, what)
            d["convergence"] = _datasets(c)
            d["convergence"]["labels"] = _text(d["convergence"].get("labels", []))
            if "combined" in g:
                d["combined"] = _datasets(g["combined"])
            out["selections"][name] = d
    return out
