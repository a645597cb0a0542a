"""A small on-orbit log and scipy's answer on it, for magproof's `orbit` fit test,
computed ONCE with the PyPI packages sgp4, ppigrf, numpy and scipy (versions written
into the output, "library" key).

The log (tests/data/orbit_fit_log.csv): 1200 samples 5 s apart along the invented orbit of
`magproof simulate orbit` (sgp4, TEME -> Earth-fixed by GMST), Earth-fixed positions
rx ry rz [km] logged, the IGRF-14 vector from ppigrf.igrf_gc seen through a tumble,
b = inv(W) B_body + c + k * i_solar + 40 nT noise per axis (seed 5).
The answer (tests/data/orbit_fit_reference.json): scipy.optimize.least_squares
(method "lm", plain least squares) on |W (b - c - k i_solar)| - |B_ppigrf| over c, the six
elements of a symmetric W and k, started from a sphere fit, with the covariance
s^2 (J^T J)^-1.

Run once:  python3 tests/data/gen/orbit_fit_reference.py   (writes both files)
"""
import datetime as dt
import json
import math
from importlib.metadata import version
from pathlib import Path

import numpy as np
import ppigrf
from scipy.optimize import least_squares
from sgp4.api import Satrec

TLE = ("1 62001U 26031B   26200.25000000  .00000900  00000-0  48000-4 0  9993",
       "2 62001  97.5200 135.0000 0008000 120.0000 240.0000 15.15000000  4501")
HERE = Path(__file__).resolve().parent.parent
SYM = [(0, 0), (1, 1), (2, 2), (0, 1), (0, 2), (1, 2)]


def gmst_rad(jd):
    tu = (jd - 2451545.0) / 36525.0
    sec = (-6.2e-6 * tu ** 3 + 0.093104 * tu ** 2
           + (876600.0 * 3600 + 8640184.812866) * tu + 67310.54841)
    return np.mod(np.radians(sec / 240.0), 2 * math.pi)


def main():
    t0 = dt.datetime(2026, 7, 19, 6, 10, 0, tzinfo=dt.timezone.utc).timestamp()
    t = t0 + 5.0 * np.arange(1200)
    days = np.floor(t / 86400.0)
    jd, fr = 2440587.5 + days, (t - days * 86400.0) / 86400.0
    err, r, _ = Satrec.twoline2rv(*TLE).sgp4_array(jd, fr)
    assert not np.any(err)
    th = gmst_rad(jd + fr)
    c, s = np.cos(th), np.sin(th)
    p = np.column_stack([c * r[:, 0] + s * r[:, 1], -s * r[:, 0] + c * r[:, 1], r[:, 2]]).round(4)
    rr = np.linalg.norm(p, axis=1)
    colat, lon = np.arccos(p[:, 2] / rr), np.arctan2(p[:, 1], p[:, 0])
    date = dt.datetime.fromtimestamp(float(t.mean()), dt.timezone.utc).replace(tzinfo=None)
    Br, Bt, Bp = (np.ravel(x) for x in ppigrf.igrf_gc(rr, np.degrees(colat), np.degrees(lon), date))
    R = np.sqrt(Br ** 2 + Bt ** 2 + Bp ** 2)
    # Any rotation keeps the magnitude: a tumble about a fixed axis by a growing angle.
    ang = np.radians(0.9) * (t - t0)
    v = np.column_stack([Br, Bt, Bp])
    body = np.column_stack([np.cos(ang) * v[:, 0] - np.sin(ang) * v[:, 2], v[:, 1],
                            np.sin(ang) * v[:, 0] + np.cos(ang) * v[:, 2]])
    body = np.column_stack([body[:, 0], np.cos(ang / 3) * body[:, 1] - np.sin(ang / 3) * body[:, 2],
                            np.sin(ang / 3) * body[:, 1] + np.cos(ang / 3) * body[:, 2]])
    W = np.array([[0.98, 0.02, -0.01], [0.02, 1.03, 0.015], [-0.01, 0.015, 1.01]])
    cvec, k = np.array([650.0, -1200.0, 380.0]), np.array([-300.0, 450.0, 120.0])
    i_solar = np.clip(1.5 * np.sin(2 * math.pi * (t - t0) / 5700.0)
                      + 0.3 * np.sin(2 * math.pi * (t - t0) / 230.0), 0.0, None).round(4)
    rng = np.random.default_rng(5)
    b = (body @ np.linalg.inv(W).T + cvec + np.outer(i_solar, k)
         + 40.0 * rng.normal(size=body.shape)).round(1)
    stamps = [dt.datetime.fromtimestamp(x, dt.timezone.utc).strftime("%Y-%m-%dT%H:%M:%SZ") for x in t]
    lines = ["t,bx,by,bz,rx [km],ry [km],rz [km],i_solar [A]"]
    lines += [f"{stamps[i]},{b[i,0]:.1f},{b[i,1]:.1f},{b[i,2]:.1f},{p[i,0]:.4f},{p[i,1]:.4f},"
              f"{p[i,2]:.4f},{i_solar[i]:.4f}" for i in range(len(t))]
    (HERE / "orbit_fit_log.csv").write_text("\n".join(lines) + "\n", encoding="utf-8")

    def unpack(q):
        Wq = np.empty((3, 3))
        for n, (i, j) in enumerate(SYM):
            Wq[i, j] = Wq[j, i] = q[3 + n]
        return q[:3], Wq, q[9:12]

    def res(q):
        cq, Wq, kq = unpack(q)
        return np.linalg.norm((b - cq - np.outer(i_solar, kq)) @ Wq, axis=1) - R

    A = np.column_stack([2 * b, R ** 2, np.ones(len(b))])
    sol = np.linalg.lstsq(A, np.einsum("ij,ij->i", b, b), rcond=None)[0]
    w0 = 1.0 / math.sqrt(sol[3])
    q0 = np.concatenate([sol[:3], [w0, w0, w0, 0, 0, 0], np.zeros(3)])
    fit = least_squares(res, q0, method="lm", x_scale="jac", xtol=1e-12, ftol=1e-12)
    cq, Wq, kq = unpack(fit.x)
    dof = len(b) - fit.x.size
    cov = float(fit.fun @ fit.fun) / dof * np.linalg.inv(fit.jac.T @ fit.jac)
    sd = np.sqrt(np.diag(cov))
    out = {"library": {"scipy": version("scipy"), "numpy": version("numpy"),
                       "sgp4": version("sgp4"), "ppigrf": version("ppigrf")},
           "log": "orbit_fit_log.csv", "method": "scipy.optimize.least_squares, method lm",
           "hard_iron_nt": cq.tolist(), "hard_iron_sigma_nt": sd[:3].tolist(),
           "soft_iron": Wq.tolist(), "soft_iron_sigma_sym": sd[3:9].tolist(),
           "i_solar_nt_per_a": kq.tolist(), "i_solar_sigma": sd[9:12].tolist(),
           "residual_rms_nt": float(np.sqrt(np.mean(fit.fun ** 2))),
           "truth": {"hard_iron_nt": cvec.tolist(), "soft_iron": W.tolist(),
                     "i_solar_nt_per_a": k.tolist()}}
    (HERE / "orbit_fit_reference.json").write_text(json.dumps(out, indent=1) + "\n", encoding="utf-8")


if __name__ == "__main__":
    main()
