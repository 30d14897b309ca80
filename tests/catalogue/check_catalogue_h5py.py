"""Read a catalogue with h5py exactly as a user would (DESIGN.md §10: h5py as the
outside reader) and check it against the layout of docs/catalogue.md and the
values the writer was given (tests/catalogue/sample_layout.hpp)."""
import os
import subprocess
import sys
import tempfile

import h5py
import numpy as np

writer = sys.argv[1]
mpiexec = os.environ.get("MPIEXEC", "mpiexec")
failures = []


def check(cond, what):
    if not cond:
        failures.append(what)
        print("FAIL:", what)


for ranks in (1, 2):
    with tempfile.TemporaryDirectory() as tmp:
        path = os.path.join(tmp, "sample.h5")
        subprocess.run([mpiexec, "-n", str(ranks), "--oversubscribe", writer, path], check=True)
        with h5py.File(path, "r") as f:
            a = f.attrs
            check(a["format_version"] == 1, "format_version")
            check(a["campaign_sha256"] == "a" * 64, "campaign_sha256")
            check(a["campaign_text"].startswith("[campaign]"), "campaign_text")
            check(a["created_utc"].endswith("Z") and len(a["created_utc"]) == 20, "created_utc ISO-8601")
            for name in ("tool_version", "git_revision", "compiler", "build_flags", "campaign_file"):
                check(isinstance(a[name], str), f"root attribute {name} is a string")

            d = f["design"]
            check([s.decode() for s in d["param_names"][()]] == ["zeta", "r_mfp"], "param_names")
            check(list(d["param_log"][()]) == [1, 0], "param_log")
            check(d["points"].shape == (3, 2) and d["points"].dtype == np.float64, "points shape/dtype")
            check(list(d.attrs["designs"]) == ["fiducial", "stencil"], "design names attribute")
            check([s.decode() for s in d["role"][()]] == ["fiducial", "stencil+", "stencil-"], "role")
            check(list(d["stencil_step"][()]) == [0.0, 1.5, -1.5], "stencil_step")
            check(list(d["seed_point"][()]) == [0, 0, 0], "seed_point")

            e = f["entries"]
            n = 9
            check(e["status"].dtype == np.int8, "status is int8")
            status = e["status"][()]
            expect = np.ones(n, dtype=np.int8)
            expect[4], expect[7] = 2, 0
            check(np.array_equal(status, expect), f"status {status} at {ranks} ranks")
            check(np.array_equal(e["point"][()], np.repeat(np.arange(3), 3)), "entries/point")
            check(np.array_equal(e["realisation"][()], np.tile(np.arange(3), 3)), "entries/realisation")
            check(np.array_equal(e["params"][()], d["points"][()][e["point"][()]]), "entries/params = points[point]")
            check(e["seed"].shape == (n, 3) and e["seed"].dtype == np.uint64, "seed shape/dtype")
            check(e["error"].dtype.itemsize == 256, "error is 256-byte text")
            check(e["error"][4].decode() == "ModelError: sample failure", "failure message")
            check(e["error"][0] == b"", "no message on a done entry")
            ranks_col = e["rank"][()]
            check(ranks_col[7] == -1 and set(ranks_col[[0, 1, 2, 3, 5, 6, 8]]) <= set(range(ranks)), "rank column")
            check(np.isnan(e["wall_time_s"][7]) and e["wall_time_s"][0] == 0.5, "wall_time_s")

            h = f["cones/history"]
            check(np.array_equal(h["z"][()], [6, 7, 8, 9, 10]), "history z")
            xh = h["x_hi"][()]
            check(xh.shape == (n, 5), "x_hi shape")
            ent, z = np.meshgrid(np.arange(n), np.arange(5), indexing="ij")
            done = status == 1
            check(np.array_equal(xh[done], (1.0 / (1.0 + ent + z))[done]), "x_hi values")
            check(np.isnan(xh[~done]).all(), "x_hi NaN where not done")

            s = f["stats"]
            check(list(s.attrs["scenarios"]) == ["clean", "noisy"], "scenario order attribute")
            check(list(s["clean"].attrs["kernels"]) == ["power", "one_point"], "kernel order attribute")
            check(s["noisy"].attrs["hours"] == 1000.0, "scenario attribute")
            for si, scen in enumerate(("clean", "noisy")):
                for ki, kern in enumerate(s[scen].attrs["kernels"]):
                    g = s[scen][kern]
                    v = g["values"][()]
                    nu, nc = g["unit_z"].shape[0], v.shape[2]
                    check(v.shape == (n, nu, nc), f"{scen}/{kern} values shape")
                    check(g["unit_freq_MHz"].shape == (nu,), f"{scen}/{kern} unit_freq_MHz")
                    flat = np.arange(nu * nc).reshape(nu, nc)
                    for i in range(n):
                        if status[i] == 1:
                            want = 1000.0 * i + 100.0 * si + 10.0 * ki + flat + 0.25
                            check(np.array_equal(v[i], want), f"{scen}/{kern} entry {i}")
                        else:
                            check(np.isnan(v[i]).all(), f"{scen}/{kern} entry {i} NaN")
            p = s["clean/power"]
            check(p.attrs["unit_kind"] == "chunk" and p.attrs["bins"] == 4, "kernel attributes")
            check(p["n_modes"].dtype == np.int64 and list(p["n_modes"][()]) == [6, 20, 80, 300], "int axis")
            check(np.array_equal(p["k_lo"][()], [0.1, 0.2, 0.4, 0.8]), "float axis")
            check(s["clean/one_point"].attrs["unit_kind"] == "slice", "slice unit kind")

            # Self-describing (docs/catalogue.md): units and a description on every dataset,
            # the axes attached to `values` as HDF5 dimension scales, read through h5py's dims API.
            undescribed = []
            f.visititems(lambda name, o: undescribed.append(name) if isinstance(o, h5py.Dataset) and not (
                isinstance(o.attrs.get("units"), str) and o.attrs.get("description")) else None)
            check(not undescribed, f"units and description on every dataset (missing: {undescribed[:5]})")
            check(f["entries/wall_time_s"].attrs["units"] == "s" and f["cones/history/mean_tb_mK"].attrs["units"] == "mK",
                  "units of timings and temperatures")
            check(p["k_lo"].attrs["units"] == "Mpc^-1" and p["n_modes"].attrs["units"] == "1", "axis units")
            check([s_.decode() if isinstance(s_, bytes) else s_ for s_ in d["param_labels"][()]] == ["zeta", "r_mfp"],
                  "param_labels default to the names")
            for scen, kern in (("clean", "power"), ("noisy", "power"), ("clean", "one_point")):
                v = s[scen][kern]["values"]
                check([dim.label for dim in v.dims] == ["entry", "unit", "coefficient"], f"{scen}/{kern} dimension labels")
                check(set(v.dims[1].keys()) == {"unit_freq_MHz", "unit_z"}, f"{scen}/{kern} unit scales")
                axes = {"power": {"k_lo", "n_modes"}, "one_point": {"moment"}}[kern]
                check(set(v.dims[2].keys()) == axes, f"{scen}/{kern} coefficient scales {list(v.dims[2].keys())}")
                check(np.array_equal(v.dims[1]["unit_z"][()], s[scen][kern]["unit_z"][()]), f"{scen}/{kern} scale data")

print(f"{0 if failures else 1} passed, {len(failures)} failed")
sys.exit(1 if failures else 0)
