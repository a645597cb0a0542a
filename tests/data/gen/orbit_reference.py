"""Reference positions and IGRF-14 magnitudes along an orbit for magproof's `orbit`
tests, computed ONCE with the PyPI packages sgp4 and ppigrf (versions written into the
output, "library" key).

The invented element set of `magproof simulate orbit` is propagated with sgp4's
Satrec.sgp4 (TEME), rotated Earth-fixed by GMST (IAU-82, UT1 = UTC, as in Vallado's
gstime), and the IGRF-14 total field is evaluated there with ppigrf.igrf_gc
(geocentric radius, colatitude, longitude) at the sample's own date and time.

Run once:  python3 tests/data/gen/orbit_reference.py > tests/data/orbit_reference.json
"""
import datetime as dt
import json
import math
from importlib.metadata import version

import numpy as np
import ppigrf
from sgp4.api import Satrec

TLE = ("1 62001U 26031B   26200.25000000  .00000900  00000-0  48000-4 0  9993",
       "2 62001  97.5200 135.0000 0008000 120.0000 240.0000 15.15000000  4501")
EPOCH = dt.datetime(2026, 7, 19, 6, 0, 0, tzinfo=dt.timezone.utc)
# Seconds after the epoch: one orbit and a bit, then a day and a week later.
OFFSETS_S = [0, 600, 1500, 2400, 3300, 4200, 5100, 5700, 86400, 7 * 86400 + 1234]


def gmst_rad(jd_ut1):
    tu = (jd_ut1 - 2451545.0) / 36525.0
    sec = (-6.2e-6 * tu ** 3 + 0.093104 * tu ** 2
           + (876600.0 * 3600 + 8640184.812866) * tu + 67310.54841)
    return (math.radians(sec / 240.0)) % (2 * math.pi)


def main():
    sat = Satrec.twoline2rv(*TLE)
    rows = []
    for off in OFFSETS_S:
        t = EPOCH.timestamp() + off
        days = math.floor(t / 86400.0)
        jd, fr = 2440587.5 + days, (t - days * 86400.0) / 86400.0
        err, r, _ = sat.sgp4(jd, fr)
        assert err == 0
        th = gmst_rad(jd + fr)
        c, s = math.cos(th), math.sin(th)
        ecef = [c * r[0] + s * r[1], -s * r[0] + c * r[1], r[2]]
        rr = math.sqrt(sum(x * x for x in ecef))
        colat = math.degrees(math.acos(ecef[2] / rr))
        lon = math.degrees(math.atan2(ecef[1], ecef[0]))
        when = dt.datetime.fromtimestamp(t, dt.timezone.utc).replace(tzinfo=None)
        br, bt, bp = (float(np.ravel(x)[0]) for x in ppigrf.igrf_gc(rr, colat, lon, when))
        rows.append({"unix_s": t, "teme_km": list(r), "ecef_km": ecef,
                     "igrf_total_nt": math.sqrt(br * br + bt * bt + bp * bp)})
    out = {"library": {"sgp4": version("sgp4"), "ppigrf": version("ppigrf"),
                       "numpy": version("numpy")},
           "tle": list(TLE), "samples": rows}
    print(json.dumps(out, indent=1))


if __name__ == "__main__":
    main()
