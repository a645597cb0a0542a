"""Reference fields of point dipoles, computed once with magpylib and stored as
tests/data/dipole_reference.json for magproof's dipole-field checks.

magpylib >= 5 uses SI throughout: Dipole(moment=A·m², position=m), getB returns tesla.
Run:  pip install magpylib==6.3.0 numpy && python3 tests/data/gen/dipole_reference.py
"""
import json
import pathlib

import magpylib
import numpy as np

rng = np.random.default_rng(20261202)
cases = []

# Textbook geometry first: on the axis and broadside of a 0.2 A·m² dipole at 0.5 m.
fixed = [
    ((0.0, 0.0, 0.2), (0.0, 0.0, 0.0), (0.0, 0.0, 0.5)),
    ((0.0, 0.0, 0.2), (0.0, 0.0, 0.0), (0.5, 0.0, 0.0)),
    ((0.3, 0.0, 0.0), (0.0, 0.04, 0.0), (0.02, 0.015, 0.21)),
    ((0.0, 0.3, 0.0), (0.04, 0.0, 0.0), (0.02, 0.015, 0.21)),
    ((0.0, 0.0, 0.15), (-0.03, -0.03, 0.02), (0.02, 0.015, 0.21)),
]
for m, src, obs in fixed:
    cases.append((np.array(m), np.array(src), np.array(obs)))
# Random moments and displacements, 0.1 m to 2 m.
for _ in range(20):
    m = rng.normal(size=3) * 0.5
    src = rng.uniform(-0.2, 0.2, size=3)
    d = rng.normal(size=3)
    d *= rng.uniform(0.1, 2.0) / np.linalg.norm(d)
    cases.append((m, src, src + d))

out = []
for m, src, obs in cases:
    dip = magpylib.misc.Dipole(moment=m, position=src)
    b_t = dip.getB(obs)
    out.append(
        {
            "moment_am2": m.tolist(),
            "dipole_position_m": src.tolist(),
            "observer_position_m": obs.tolist(),
            "field_nt": (np.asarray(b_t) * 1e9).tolist(),
        }
    )

doc = {
    "source": f"magpylib {magpylib.__version__} (magpylib.misc.Dipole.getB, SI units, T converted to nT)",
    "generator": "tests/data/gen/dipole_reference.py",
    "cases": out,
}
path = pathlib.Path(__file__).resolve().parent.parent / "dipole_reference.json"
path.write_text(json.dumps(doc, indent=1) + "\n")
print(f"wrote {len(out)} cases to {path}")
