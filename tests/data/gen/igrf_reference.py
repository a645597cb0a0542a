"""Reference IGRF-14 field values for magproof's tests, computed ONCE with ppigrf.

Library: ppigrf (PyPI), version written into the output ("library" key); it evaluates
IGRF-14 from its bundled IGRF14.shc with geodetic (WGS-84) input and returns
Be, Bn, Bu (east, north, UP) in nT relative to the ellipsoid. Here down = -up.
Dates are passed as datetime at 00:00 UTC; ppigrf interpolates the coefficients
linearly in time between the 5-year epochs (2025-2030 through the secular variation).

Declination and inclination are computed here with atan2 (ppigrf's own helper uses
arcsin for the declination, which folds |D| > 90 deg near the poles).

ppigrf divides by sin(colatitude) for the east component, so at exactly +-90 deg it
returns NaN; such a site is evaluated 1e-5 deg (about 1.1 m) from the pole and the
latitude actually used is stored as "ppigrf_lat_deg".

Also stores B0 = sqrt(g10^2 + g11^2 + h11^2) at a few dates, from ppigrf.read_shc
coefficients interpolated linearly in time (the same rule ppigrf.igrf uses).

Run once:  python tests/data/gen/igrf_reference.py > tests/data/igrf_reference.json
"""
import json
import math
from datetime import datetime
from importlib.metadata import version

import numpy as np
import ppigrf
from ppigrf.ppigrf import read_shc

# (label, lat_deg, lon_deg, alt_m, date)
SITES = [
    ("north pole", 90.0, 0.0, 0.0, datetime(2020, 1, 1)),
    ("south pole", -90.0, 0.0, 2835.0, datetime(2027, 6, 15)),
    ("date line east side, Fiji", -17.7, 180.0, 0.0, datetime(2016, 3, 1)),
    ("date line west side", 52.0, -180.0, 0.0, datetime(2021, 11, 30)),
    ("LEO 500 km, 51.6 deg", 51.6, -30.0, 500e3, datetime(2022, 9, 10)),
    ("GEO 35786 km", 0.0, 75.0, 35786e3, datetime(2025, 1, 1)),
    ("South Atlantic Anomaly", -26.0, -45.0, 0.0, datetime(2019, 7, 4)),
    ("Swiss test hall, end of validity", 47.0, 8.0, 400.0, datetime(2029, 12, 31)),
    ("first day of range", 64.1, -21.9, 30.0, datetime(2015, 1, 1)),
    ("last day of range", -33.9, 151.2, 50.0, datetime(2030, 1, 1)),
    ("near the dip pole", 86.0, 150.0, 0.0, datetime(2026, 4, 20)),
    ("high plateau, leap day", 30.0, 90.0, 5000.0, datetime(2024, 2, 29)),
    ("below sea level", 31.5, 35.5, -430.0, datetime(2018, 8, 1)),
    ("LEO 400 km equator, SV year", 0.0, -100.0, 400e3, datetime(2028, 3, 3)),
]

sites = []
for label, lat, lon, alt_m, date in SITES:
    lat_used = lat
    if abs(lat) == 90.0:
        lat_used = math.copysign(90.0 - 1e-5, lat)
    be, bn, bu = ppigrf.igrf(lon, lat_used, alt_m / 1e3, date)
    e, n, d = float(be.ravel()[0]), float(bn.ravel()[0]), -float(bu.ravel()[0])
    h = math.hypot(n, e)
    sites.append(
        {
            "label": label,
            "lat_deg": lat,
            "ppigrf_lat_deg": lat_used,
            "lon_deg": lon,
            "alt_m": alt_m,
            "date": date.strftime("%Y-%m-%d"),
            "north_nt": n,
            "east_nt": e,
            "down_nt": d,
            "horizontal_nt": h,
            "total_nt": math.sqrt(h * h + d * d),
            "declination_deg": math.degrees(math.atan2(e, n)),
            "inclination_deg": math.degrees(math.atan2(d, h)),
        }
    )

g, hh = read_shc()
b0 = []
for date in [datetime(2015, 1, 1), datetime(2020, 1, 1), datetime(2022, 7, 2), datetime(2029, 12, 31)]:
    idx = g.index.union([date])
    gi = g.reindex(idx).groupby(idx).first().interpolate(method="time").loc[date]
    hi = hh.reindex(idx).groupby(idx).first().interpolate(method="time").loc[date]
    g10, g11, h11 = float(gi[(1, 0)]), float(gi[(1, 1)]), float(hi[(1, 1)])
    b0.append(
        {
            "date": date.strftime("%Y-%m-%d"),
            "g10": g10,
            "g11": g11,
            "h11": h11,
            "b0_nt": math.sqrt(g10**2 + g11**2 + h11**2),
        }
    )

print(
    json.dumps(
        {
            "library": f"ppigrf {version('ppigrf')}",
            "numpy": np.__version__,
            "model": "IGRF-14 (ppigrf bundled IGRF14.shc)",
            "convention": "north/east/down relative to the WGS-84 ellipsoid, nT; down = -ppigrf Bu",
            "sites": sites,
            "b0": b0,
        },
        indent=1,
    )
)
