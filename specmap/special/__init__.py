"""The special set of a pair of extended Pareto grids in the parameter strip.

Entry point :func:`special_set` returns an :class:`Atlas` of curves, points and
patches (pieces per :class:`Tie`) and their connected components.

References
----------
.. [EFQT23] Ethier, Frosini, Quercioli, Tombari, J. Appl. Comput. Topol. (2023).
"""

from __future__ import annotations

from specmap.special.atlas import Atlas, AtlasSummary, Component, TiePiece, atlas_from_json
from specmap.special.compute import default_tolerance, special_set
from specmap.special.evaluate import extended_parameter, tie_residual, tie_value
from specmap.special.pairs import Tie, tie_from_json

__all__ = [
    "Atlas",
    "AtlasSummary",
    "Component",
    "Tie",
    "TiePiece",
    "atlas_from_json",
    "default_tolerance",
    "extended_parameter",
    "special_set",
    "tie_from_json",
    "tie_residual",
    "tie_value",
]
