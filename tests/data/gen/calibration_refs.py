#!/usr/bin/env python3
"""Reference values for magproof's calibration tests, computed once with general-purpose
libraries and stored as test data.

Writes, into tests/data/:
  calib_tumble.csv     a synthetic tumble log (t, bx, by, bz in nT), generated with numpy
  calib_cage.csv       a synthetic cage sweep (t, hx..hz, bx..bz in nT), generated with numpy
  calib_refs.json      the fits of both logs:
     tumble: scipy.optimize.least_squares (method "lm") on the magnitude residual
             |W (b - c)| - R, seeded by the Li & Griffiths (2004) algebraic fit, plain
             least squares (no outlier rejection); covariance s^2 (J^T J)^-1.
     cage:   numpy.linalg.lstsq of b = A h + b0, per-axis covariance s_a^2 (X^T X)^-1.
  Library names and versions are written into the JSON beside the numbers.

The tumble fit follows the reference notebook logic used for the project's benchmark
(its model and parameter layout: c0 c1 c2 | W00 W11 W22 W01 W02 W12).

Run from the repository root:  python3 tests/data/gen/calibration_refs.py
"""
import json
import os
import sys

import numpy as np
import scipy
from scipy.optimize import least_squares

OUT = os.path.join(os.path.dirname(os.path.abspath(__file__)), "..")
SYM_INDEX = [(0, 0), (1, 1), (2, 2), (0, 1), (0, 2), (1, 2)]


def sym_from_params(w6):
    W = np.empty((3, 3))
    for k, (i, j) in enumerate(SYM_INDEX):
        W[i, j] = W[j, i] = w6[k]
    return W


def sqrtm_spd(M):
    vals, vecs = np.linalg.eigh(0.5 * (M + M.T))
    if np.any(vals <= 0):
        raise ValueError("fitted quadric is not an ellipsoid")
    return (vecs * np.sqrt(vals)) @ vecs.T


def ellipsoid_fit_li_griffiths(b):
    mean = b.mean(axis=0)
    scale = np.sqrt(((b - mean) ** 2).sum(axis=1).mean())
    x, y, z = ((b - mean) / scale).T
    D = np.column_stack([x * x, y * y, z * z, 2 * y * z, 2 * x * z, 2 * x * y,
                         2 * x, 2 * y, 2 * z, np.ones_like(x)])
    S = D.T @ D
    S11, S12, S22 = S[:6, :6], S[:6, 6:], S[6:, 6:]
    C1 = np.zeros((6, 6))
    C1[:3, :3] = 1.0
    np.fill_diagonal(C1[:3, :3], -1.0)
    C1[3:, 3:] = -4.0 * np.eye(3)
    T = np.linalg.solve(S22, S12.T)
    M = np.linalg.solve(C1, S11 - S12 @ T)
    vals, vecs = np.linalg.eig(M)
    v1 = np.real(vecs[:, int(np.argmax(np.real(vals)))])
    v2 = -T @ v1
    a, bb, cc, f, g, h = v1
    Q = np.array([[a, h, g], [h, bb, f], [g, f, cc]])
    x0 = -np.linalg.solve(Q, v2[:3])
    shape = Q / (x0 @ Q @ x0 - v2[3])
    if np.linalg.eigvalsh(shape).min() <= 0:
        shape = -shape
    return mean + scale * x0, sqrtm_spd(shape) / scale


def residual_and_jacobian(p, b, R):
    c = p[:3]
    W = sym_from_params(p[3:])
    d = b - c
    v = d @ W
    n = np.sqrt((v * v).sum(axis=1))
    vh = v / n[:, None]
    J = np.empty((b.shape[0], 9))
    J[:, :3] = -(vh @ W)
    for k, (i, j) in enumerate(SYM_INDEX):
        J[:, 3 + k] = vh[:, i] * d[:, i] if i == j else vh[:, i] * d[:, j] + vh[:, j] * d[:, i]
    return n - R, J


def tumble_reference(b, R):
    centre, W1 = ellipsoid_fit_li_griffiths(b)
    p0 = np.concatenate([centre, [R * W1[i, j] for (i, j) in SYM_INDEX]])
    res = least_squares(lambda p: residual_and_jacobian(p, b, R)[0], p0,
                        jac=lambda p: residual_and_jacobian(p, b, R)[1],
                        method="lm", xtol=1e-15, ftol=1e-15, gtol=1e-15)
    r = res.fun
    s2 = float(r @ r) / (len(r) - 9)
    cov = s2 * np.linalg.inv(res.jac.T @ res.jac)
    return {
        "hard_iron_nt": res.x[:3].tolist(),
        "soft_iron": sym_from_params(res.x[3:]).tolist(),
        "hard_iron_sigma_nt": np.sqrt(np.diag(cov)[:3]).tolist(),
        "residual_rms_nt": float(np.sqrt(np.mean(r * r))),
        "samples_used": int(len(r)),
    }


def cage_reference(h, b):
    X = np.column_stack([h, np.ones(len(h))])
    beta, _, rank, _ = np.linalg.lstsq(X, b, rcond=None)
    resid = b - X @ beta
    s2 = (resid ** 2).sum(axis=0) / (len(h) - 4)
    xtx_inv = np.linalg.inv(X.T @ X)
    return {
        "response": beta[:3].T.tolist(),
        "hard_iron_nt": beta[3].tolist(),
        "hard_iron_sigma_nt": np.sqrt(s2 * xtx_inv[3, 3]).tolist(),
        "soft_iron_cage": np.linalg.inv(beta[:3].T).tolist(),
        "residual_rms_nt": float(np.sqrt((resid ** 2).sum(axis=1).mean())),
        "rank": int(rank),
    }


def main():
    rng = np.random.default_rng(20261202)
    # Tumble: 600 samples over the sphere in a 49 000 nT field, noise 40 nT per axis.
    R = 49_000.0
    W = np.array([[1.03, 0.02, -0.015], [0.02, 0.96, 0.012], [-0.015, 0.012, 1.02]])
    c = np.array([950.0, -1210.0, 530.0])
    u = rng.normal(size=(600, 3))
    u /= np.linalg.norm(u, axis=1)[:, None]
    b = (np.linalg.inv(W) @ (R * u).T).T + c + rng.normal(scale=40.0, size=(600, 3))
    with open(os.path.join(OUT, "calib_tumble.csv"), "w") as f:
        f.write("# synthetic tumble for the outside check (tests/data/gen/calibration_refs.py)\n")
        f.write("t [s],bx [nT],by [nT],bz [nT]\n")
        for i, row in enumerate(b):
            f.write(f"{i * 0.1:.1f},{row[0]:.4f},{row[1]:.4f},{row[2]:.4f}\n")
    # Re-read what was written so the reference sees exactly the stored numbers.
    bt = np.loadtxt(os.path.join(OUT, "calib_tumble.csv"), delimiter=",", skiprows=2)[:, 1:4]

    # Cage: 4x4x4 grid to +-50 000 nT, 3 repeats, noise 25 nT.
    A = np.array([[1.021, 0.006, -0.012], [-0.004, 0.987, 0.009], [0.011, -0.007, 1.032]])
    b0 = np.array([-410.0, 870.0, 1330.0])
    g = np.linspace(-50_000.0, 50_000.0, 4)
    H = np.array([[x, y, z] for x in g for y in g for z in g for _ in range(3)])
    B = H @ A.T + b0 + rng.normal(scale=25.0, size=H.shape)
    with open(os.path.join(OUT, "calib_cage.csv"), "w") as f:
        f.write("# synthetic cage sweep for the outside check (tests/data/gen/calibration_refs.py)\n")
        f.write("t [s],hx [nT],hy [nT],hz [nT],bx [nT],by [nT],bz [nT]\n")
        for i, (h, bb) in enumerate(zip(H, B)):
            f.write(f"{i * 0.5:.1f},{h[0]:.1f},{h[1]:.1f},{h[2]:.1f},"
                    f"{bb[0]:.4f},{bb[1]:.4f},{bb[2]:.4f}\n")
    cg = np.loadtxt(os.path.join(OUT, "calib_cage.csv"), delimiter=",", skiprows=2)

    refs = {
        "generator": "tests/data/gen/calibration_refs.py",
        "python": sys.version.split()[0],
        "tumble": {
            "log": "calib_tumble.csv",
            "reference_nt": R,
            "library": f"scipy {scipy.__version__} (scipy.optimize.least_squares, method lm), "
                       f"numpy {np.__version__}",
            "fit": tumble_reference(bt, R),
        },
        "cage": {
            "log": "calib_cage.csv",
            "library": f"numpy {np.__version__} (numpy.linalg.lstsq)",
            "fit": cage_reference(cg[:, 1:4], cg[:, 4:7]),
        },
    }
    with open(os.path.join(OUT, "calib_refs.json"), "w") as f:
        json.dump(refs, f, indent=2)
        f.write("\n")


if __name__ == "__main__":
    main()
