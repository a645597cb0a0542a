"""Reference fields of uniformly magnetised cylinders (finite torque-rod model), computed
once with magpylib and stored as tests/data/finite_rod_reference.json for magproof's
finite-rod checks.

magpylib >= 5 uses SI throughout: Cylinder(polarization=J [T], dimension=(d, h) [m]),
getB returns tesla. A rod of moment m (A·m²), length L and radius a has magnetisation
M = m / (π a² L) and polarization J = μ0 M. Each case also holds the point-dipole field
of the same moment (magpylib.misc.Dipole) so the finite-size effect is visible.
Run:  pip install magpylib==6.3.0 numpy && python3 tests/data/gen/finite_rod_reference.py
"""
import json
import math
import pathlib

import magpylib
import numpy as np

MU0 = 4e-7 * math.pi
rng = np.random.default_rng(20261204)

# (moment A·m², length m, radius m, observer m in the rod frame: axis +z, centre origin)
cases = [
    # Bench stations: on the axis and broadside of a 7 cm rod, 3 to 8 rod lengths away.
    (0.25, 0.07, 0.004, (0.0, 0.0, 0.21)),
    (0.25, 0.07, 0.004, (0.0, 0.0, 0.35)),
    (0.25, 0.07, 0.004, (0.21, 0.0, 0.0)),
    (0.25, 0.07, 0.004, (0.0, 0.56, 0.0)),
    # Inside a vehicle: a magnetometer 3.6 cm from a 7 cm rod, at several angles.
    (0.2, 0.07, 0.004, (0.036 * math.sin(0.5), 0.0, 0.036 * math.cos(0.5))),
    (0.2, 0.07, 0.004, (0.036 / math.sqrt(2), 0.0, 0.036 / math.sqrt(2))),
    (0.2, 0.07, 0.004, (0.0, 0.036, 0.0)),
    (-0.1, 0.1, 0.005, (0.03, -0.02, 0.09)),
]
for _ in range(12):
    length = rng.uniform(0.05, 0.15)
    radius = rng.uniform(0.002, 0.008)
    d = rng.normal(size=3)
    d *= rng.uniform(0.6, 6.0) * length / np.linalg.norm(d)
    cases.append((rng.uniform(-0.5, 0.5), length, radius, tuple(d)))

out = []
for m, length, radius, obs in cases:
    j = MU0 * m / (math.pi * radius**2 * length)
    cyl = magpylib.magnet.Cylinder(polarization=(0, 0, j), dimension=(2 * radius, length))
    dip = magpylib.misc.Dipole(moment=(0, 0, m))
    out.append(
        {
            "moment_am2": m,
            "length_m": length,
            "radius_m": radius,
            "observer_m": list(obs),
            "field_nt": (cyl.getB(obs) * 1e9).tolist(),
            "dipole_field_nt": (dip.getB(obs) * 1e9).tolist(),
        }
    )

path = pathlib.Path(__file__).resolve().parent.parent / "finite_rod_reference.json"
path.write_text(
    json.dumps(
        {
            "source": f"magpylib {magpylib.__version__} (magpylib.magnet.Cylinder and "
            "magpylib.misc.Dipole, getB, SI units, T converted to nT)",
            "generator": "tests/data/gen/finite_rod_reference.py",
            "cases": out,
        },
        indent=1,
    )
    + "\n"
)
print(f"wrote {path}")
