"""The atlas source of the reduced search: only the ties that can be where D is read.

:func:`focused_source` wraps :func:`specmap.special.focus.focused_special_set` in the
``source(floor, upper, bounds_at)`` form that :func:`~specmap.distance.reduced.reduced_search`
calls once it knows its floor (the slope-one value) and has the node bounds of h
(:mod:`specmap.distance.node_bounds`) on the atlas's lattice.
"""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

import numpy as np

from specmap.distance.node_bounds import NodeBounds
from specmap.grids.model import Grid
from specmap.settings import MapSettings
from specmap.special.atlas import Atlas
from specmap.strip import Window

Source = Callable[[float, float, Callable[[np.ndarray, np.ndarray], NodeBounds] | None], Atlas]


def focused_source(
    grid_f: Grid, grid_g: Grid, window: Window, *, roles: bool = True, **atlas_kw: Any
) -> Source:
    """A source of the focused atlas of two grids (``atlas_kw``: ``special_set`` keywords and ``budget``).

    The node bounds are read on the atlas's own lattice (``resolution``, default the map's)
    and recorded in ``stats["focus"]["node_bounds"]``.
    """
    from specmap.special.focus import focused_special_set

    res = atlas_kw.get("resolution", MapSettings.resolution)
    n_a, n_b = (res, res) if isinstance(res, int) else tuple(res)

    def source(floor: float, upper: float, bounds_at=None) -> Atlas:
        nodes = None
        record = None
        if bounds_at is not None:
            nb = bounds_at(np.linspace(*window.a, int(n_a)), np.linspace(*window.b, int(n_b)))
            nodes = (nb.upper, nb.edge_a, nb.edge_b)
            record = nb.summary()
        atlas = focused_special_set(
            grid_f, grid_g, window, (floor, upper), roles=roles, node_upper=nodes, **atlas_kw
        )
        atlas.stats["focus"]["node_bounds"] = record
        return atlas

    return source
