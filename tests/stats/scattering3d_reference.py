"""Independent numpy float64 implementation of the cylindrical wavelet scattering of DESIGN.md §6
([stats.scattering3d]) at full resolution: the reference of tests/stats/check_scattering3d.py and the
denominator of bench/scattering3d_numpy.py."""
import numpy as np

XI0 = ETA0 = 3 * np.pi / 4
RHO = 0.5


def band(u, c, w):
    """exp(-(u-c)²/2w²) - exp(-(u²+c²)/2w²): R_j and Z_m of DESIGN.md §6."""
    return np.exp(-(u - c) ** 2 / (2 * w ** 2)) - np.exp(-(u ** 2 + c ** 2) / (2 * w ** 2))


def psi_hat(k1, k2, k3, j, m, xi0=XI0, eta0=ETA0, rho=RHO):
    xi, eta = xi0 * 2.0 ** -j, eta0 * 2.0 ** -m
    return band(np.sqrt(k1 ** 2 + k2 ** 2), xi, rho * xi) * band(k3, eta, rho * eta)


def grid_k(shape):
    return np.meshgrid(*[2 * np.pi * np.fft.fftfreq(n) for n in shape], indexing="ij")


def pairs(J, M):
    """(j1, m1, j2, m2) in the contract's order: j1, m1, j2, m2 ascending, j1 slowest."""
    return [(a, b, c, d) for a in range(J) for b in range(M) for c in range(a, J) for d in range(b, M)
            if (c, d) != (a, b)]


def reference(x, J, M, normalise=False, **kw):
    """S0, S1(j, m), S2(j1, m1, j2, m2) in the contract's order, float64 throughout."""
    x = x.astype(np.float64)
    k1, k2, k3 = grid_k(x.shape)
    X = np.fft.fftn(x)
    S1, UX, out2 = {}, {}, []
    out = [x.mean()]
    for j in range(J):
        for m in range(M):
            U = np.abs(np.fft.ifftn(X * psi_hat(k1, k2, k3, j, m, **kw)))
            S1[j, m] = U.mean()
            out.append(S1[j, m])
            if (j, m) != (J - 1, M - 1):
                UX[j, m] = np.fft.fftn(U)
    for a, b, c, d in pairs(J, M):
        s2 = np.abs(np.fft.ifftn(UX[a, b] * psi_hat(k1, k2, k3, c, d, **kw))).mean()
        out2.append(s2 / S1[a, b] if normalise else s2)
    return np.array(out + out2)
