"""Compare two catalogues with h5py (DESIGN.md §3, §10: h5py reads the files as any
user would). Every dataset must be present in both with the same shape and dtype;
data must be bit-identical (NaN == NaN), except the run-dependent columns
/entries/wall_time_s and /entries/rank. With rtol > 0, floats may differ by that
relative amount (different group sizes: serial vs distributed FFT); scale_atol
adds that fraction of a dataset's largest |value| to atol (values that are float
rounding residue of an exact zero, such as the mean of a field without its k = 0 mode)."""
import h5py
import numpy as np

RUN_DEPENDENT = ("entries/wall_time_s", "entries/rank")


def datasets(f):
    names = []
    f.visititems(lambda n, o: names.append(n) if isinstance(o, h5py.Dataset) else None)
    return sorted(names)


def compare(path_a, path_b, rtol=0.0, atol=0.0, scale_atol=0.0):
    """Return a list of differences (empty: the same data)."""
    problems = []
    with h5py.File(path_a, "r") as a, h5py.File(path_b, "r") as b:
        na, nb = datasets(a), datasets(b)
        if na != nb:
            problems.append(f"dataset names differ: {sorted(set(na) ^ set(nb))}")
        for n in sorted(set(na) & set(nb)):
            if n in RUN_DEPENDENT:
                continue
            x, y = a[n][()], b[n][()]
            if x.shape != y.shape or x.dtype != y.dtype:
                problems.append(f"{n}: shape/dtype {x.shape} {x.dtype} vs {y.shape} {y.dtype}")
                continue
            if x.dtype.kind == "f":
                if rtol == 0.0 and atol == 0.0:
                    same = np.array_equal(x.view(np.uint8), y.view(np.uint8)) if x.size else True
                else:
                    scale = np.nanmax(np.abs(x)) if scale_atol and np.isfinite(x).any() else 0.0
                    same = np.allclose(x, y, rtol=rtol, atol=atol + scale_atol * scale, equal_nan=True)
            else:
                same = np.array_equal(x, y)
            if not same:
                problems.append(f"{n}: data differ")
        for attr in ("campaign_sha256", "campaign_text"):
            if a.attrs[attr] != b.attrs[attr]:
                problems.append(f"root attribute {attr} differs")
    return problems


if __name__ == "__main__":
    import sys
    p = compare(sys.argv[1], sys.argv[2], float(sys.argv[3]) if len(sys.argv) > 3 else 0.0)
    print("\n".join(p) if p else "identical")
    sys.exit(1 if p else 0)
