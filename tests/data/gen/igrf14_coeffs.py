"""Extract the IGRF-14 epochs magproof needs into src/physics/igrf14_coeffs.txt.

Source: the IGRF-14 coefficient file IGRF14.shc shipped inside the PyPI package
ppigrf (version printed into the output header). That file holds the IAGA IGRF-14
Gauss coefficients at 5-year epochs; its last column (2030.0) is the 2025 model
propagated with the IGRF-14 secular variation, 2030 = 2025 + 5 * SV, so
SV = (c2030 - c2025) / 5 (rounded to 0.01 nT/yr to drop float noise).

Run once:  python tests/data/gen/igrf14_coeffs.py > src/physics/igrf14_coeffs.txt
"""
import os
from importlib.metadata import version

import ppigrf

path = os.path.join(os.path.dirname(ppigrf.__file__), "IGRF14.shc")
rows = []
years = None
header_left = 2
with open(path) as f:
    for line in f:
        if line.startswith("#"):
            continue
        if header_left == 2:
            header_left -= 1
            continue
        if header_left == 1:
            years = [float(x) for x in line.split()]
            header_left -= 1
            continue
        parts = line.split()
        n, m = int(parts[0]), int(parts[1])
        vals = [float(x) for x in parts[2:]]
        rows.append((n, m, dict(zip(years, vals))))

print("# IGRF-14 main-field Gauss coefficients, International Association of Geomagnetism")
print("# and Aeronomy (IAGA) Division V Working Group V-MOD, 14th generation (2024),")
print("# https://doi.org/10.5281/zenodo.14012302")
print(f"# Copied from the file IGRF14.shc inside the PyPI package ppigrf {version('ppigrf')};")
print("# only the epochs magproof needs are kept. Extracted by tests/data/gen/igrf14_coeffs.py.")
print("# Columns: n m c2015 c2020 c2025 sv   (nT, nT, nT, nT/yr)")
print("# m >= 0: g(n,m); m < 0: h(n,|m|).  sv = (c2030 - c2025)/5 from the .shc 2030 column,")
print("# i.e. the IGRF-14 secular variation for 2025-2030.")
for n, m, v in rows:
    sv = round((v[2030.0] - v[2025.0]) / 5.0, 2) + 0.0
    print(f"{n:2d} {m:3d} {v[2015.0]:10.2f} {v[2020.0]:10.2f} {v[2025.0]:10.2f} {sv:7.2f}")
