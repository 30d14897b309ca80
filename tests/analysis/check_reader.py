"""The Python reader (python/spinflip_catalogue) against h5py directly: it opens
a catalogue (variable- and fixed-length strings) and every analysis output."""
import os

import h5py
import numpy as np

import spinflip_catalogue as sc
from support import check, finish, make_catalogue, run, workdir

d = workdir()
for fixed in (False, True):
    cat = os.path.join(d, f"cat{int(fixed)}.h5")
    truth = make_catalogue.make(cat, n_fid=80, n_stencil=8, fixed_strings=fixed)
    tag = "fixed-length strings" if fixed else "variable-length strings"
    with sc.open_catalogue(cat) as c:
        check(c.param_names == ["zeta", "L_X", "E_0"] and list(c.param_log) == [False, True, False],
              f"{tag}: parameter names and log flags")
        check(c.kernels() == [("deep", "power"), ("deep", "scattering"), ("shallow", "power"), ("shallow", "scattering")],
              f"{tag}: kernel groups listed")
        fid = c.entries_with_role("fiducial")
        st = c.stats("shallow", "scattering", fid[::-1])
        with h5py.File(cat) as f:
            ref = f["stats/shallow/scattering/values"][()][fid[::-1]]
        check(np.array_equal(st.values, ref), f"{tag}: stats() rows in the order asked (h5py reference)")
        check(list(st.axes["order"]) == [0, 1, 1, 1, 2, 2] and st.attrs["reduce"] == "rotation", f"{tag}: axes and attrs")
        check(len(c.done()) == len(truth["status"]), f"{tag}: every entry done")
    # The verbs read the same file (the C++ reader handles both string kinds).
    cov, fis, exp = (os.path.join(d, f"{k}{int(fixed)}.h5") for k in ("cov", "fisher", "train"))
    run("covariance", cat, "-s", "name=ps;kernel=power", "--no-plot", "-o", cov)
    run("fisher", cat, "-s", "name=ps;kernel=power;every=2", "--no-plot", "-o", fis)
    run("export", cat, "-s", "name=ps;kernel=power", "-o", exp)
    cv = sc.load_covariance(cov)["ps"]
    check(cv["cov"].shape == (24, 24) and len(cv["labels"]) == 24 and cv["attrs"]["n_realisations"] == 80,
          f"{tag}: load_covariance")
    fr = sc.load_fisher(fis)
    check(fr["param_names"] == ["zeta", "log10(L_X)", "E_0"] and fr["selections"]["ps"]["fisher"].shape == (3, 3),
          f"{tag}: load_fisher")
    ts = sc.load_export(exp)
    check(ts.data("ps", split="train").shape[0] == int((ts.split == 0).sum()) and ts.provenance["format_version"] == 1,
          f"{tag}: load_export")
# to_unit/from_unit round trip on random values (log and linear columns).
rng = np.random.default_rng(1)
lo, hi, lg = np.array([1.0, 1e-3]), np.array([5.0, 1e3]), np.array([0, 1])
v = sc.from_unit(rng.random((50, 2)), lo, hi, lg)
check(np.allclose(sc.from_unit(sc.to_unit(v, lo, hi, lg), lo, hi, lg), v, rtol=1e-13), "to_unit/from_unit round trip")
finish()
