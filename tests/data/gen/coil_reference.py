"""Reference fields of circular current loops for magproof's coil tests, computed ONCE
with magpylib (PyPI; version written into the output "library" key).

magpylib.current.Circle(current=I [A], diameter=D [m]) lies in the xy-plane centred at
its position; getB returns tesla (SI units since magpylib 5). Values are stored in nT.

Cases: a single loop, points on its axis (z), and a Helmholtz pair (two coaxial loops
of N turns each, radius R, spacing R) at points on the common axis. N turns are
modelled as one loop carrying N*I.

Run once:  python tests/data/gen/coil_reference.py > tests/data/coil_reference.json
"""
import json
from importlib.metadata import version

import magpylib as magpy
import numpy as np

loops = []
for current_a, radius_m, zs in [
    (1.0, 0.5, [0.0, 0.1, 0.25, 0.5, 1.0, 3.0, -0.7]),
    (2.5, 0.05, [0.0, 0.01, 0.05, 0.2]),
    (-0.8, 1.2, [0.0, 0.6, 2.4]),
]:
    loop = magpy.current.Circle(current=current_a, diameter=2.0 * radius_m)
    pts = np.array([[0.0, 0.0, z] for z in zs])
    b = loop.getB(pts) * 1e9
    loops.append(
        {
            "current_a": current_a,
            "radius_m": radius_m,
            "z_m": zs,
            "bz_nt": [float(v[2]) for v in b],
            "bxy_max_nt": float(np.max(np.abs(b[:, :2]))),
        }
    )

pairs = []
for turns, current_a, radius_m, zs in [
    (20, 1.5, 0.5, [0.0, 0.05, 0.1, -0.2]),
    (100, 0.2, 1.0, [0.0, 0.3]),
]:
    half = radius_m / 2.0
    c = magpy.Collection(
        magpy.current.Circle(current=turns * current_a, diameter=2 * radius_m, position=(0, 0, -half)),
        magpy.current.Circle(current=turns * current_a, diameter=2 * radius_m, position=(0, 0, half)),
    )
    pts = np.array([[0.0, 0.0, z] for z in zs])
    b = c.getB(pts) * 1e9
    pairs.append(
        {
            "turns": turns,
            "current_a": current_a,
            "radius_m": radius_m,
            "z_m": zs,
            "bz_nt": [float(v[2]) for v in b],
        }
    )

print(
    json.dumps(
        {
            "library": f"magpylib {version('magpylib')}",
            "numpy": np.__version__,
            "loops": loops,
            "helmholtz_pairs": pairs,
        },
        indent=1,
    )
)
