"""Regenerate the mesh pair of studies/knob.toml (an invented scenario).

A rounded knob (a sphere with three bumps) carries two fields: a height-like
measurement and a twisted one. The second mesh is the same knob with a slightly
different twist. Run from the repository root:

    python studies/data/make_meshes.py
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from specmap.shapes.meshes import write_mesh
from specmap.shapes.surfaces import Ellipsoid


def knob(resolution: int, twist: float) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    V, T = Ellipsoid((1.0, 1.0, 1.0)).mesh(resolution)
    x, y, z = V.T
    bump = 1.0 + 0.3 * np.exp(-((x - 0.8) ** 2 + y**2) * 4) + 0.1 * np.exp(-((y + 0.7) ** 2 + z**2) * 5)
    V = V * bump[:, None]
    x, y, z = V.T
    f1 = x + 0.3 * z + 0.25 * np.sin(3 * y)
    f2 = y + twist * x * z + 0.2 * np.cos(3 * x)
    return V, T, np.c_[f1, f2]


if __name__ == "__main__":
    here = Path(__file__).parent
    for name, twist in (("knob_a.ply", 0.25), ("knob_b.ply", 0.32)):
        V, T, vals = knob(2500, twist)
        write_mesh(here / name, V, T, vals, names=("f1", "f2"))
        print(name, len(V), "vertices")
