"""The matching distance: dense sweep, reduced search on the special set, and audits.

For meshed maps f, g: M -> R^2 the matching distance in degree k is

    D_k(f, g) = sup over lines (a, b) of h_k(a, b),
    h_k(a, b) = d_B(Dgm_k F*_f(a, b), Dgm_k F*_g(a, b))                    [CDFFL13]

specmap computes it two ways and compares them:

- **dense**: h_k on a node grid of the window, the best node refined by a
  pattern search, with a rigorous sampling-error bound (:func:`lipschitz_constants`);
- **reduced**: by the main theorem [EFQT23, FMQT] D_k is reached on the
  slope-one line a = 1/2 or at a special value, so h_k is evaluated only on
  a = 1/2 and along the special set of an atlas (:mod:`specmap.special`),
  skipping ties whose tied cost cannot be the maximum (math.md section 5).

Modules, one idea each (data flow top to bottom):

- :mod:`~specmap.distance.evaluator` -- :class:`LineEvaluator`: h_k on many lines
  (memo, joblib workers, progress);
- :mod:`~specmap.distance.bounds` -- bounds without diagrams (Lipschitz constants,
  sup norms of F*, value ranges, the cell error of a node grid, :class:`LocalBound`);
- :mod:`~specmap.distance.refine` -- compass search and golden-section polish;
- :mod:`~specmap.distance.dense` -- :func:`dense_sweep` -> :class:`DenseSweep`;
- :mod:`~specmap.distance.slope_one` -- :func:`slope_one_search` -> :class:`SlopeOneSearch`;
- :mod:`~specmap.distance.ties` -- tied costs at many candidates (the rules: :mod:`specmap.special.pairs`);
- :mod:`~specmap.distance.paths`, :mod:`~specmap.distance.candidates` --
  :func:`special_candidates` -> :class:`Candidates`;
- :mod:`~specmap.distance.reduced` -- :func:`reduced_search` -> :class:`ReducedSearch`;
- :mod:`~specmap.distance.audit` -- theorem and position audits;
- :mod:`~specmap.distance.result` -- the typed results and the JSON of ``distance.json``;
- :mod:`~specmap.distance.compose` -- :func:`matching_distance` -> :class:`DistanceResult`.

References
----------
.. [CDFFL13] Cerri, Di Fabio, Ferri, Frosini, Landi, "Betti numbers in
   multidimensional persistent homology are stable functions", Math. Methods
   Appl. Sci. 36 (2013).
.. [EFQT23] Ethier, Frosini, Quercioli, Tombari, "Geometry of the matching
   distance for 2D filtering functions", J. Appl. Comput. Topol. (2023).
.. [FMQT] Frosini, Mosig Garcia, Quercioli, Tombari, "Matching distance via the
   extended Pareto grid", arXiv:2312.04201.
.. [CEF19] Cerri, Ethier, Frosini, J. Appl. Comput. Topol. 3 (2019): position
   of diagram points on the extended Pareto grid.
.. [DFL10] d'Amico, Frosini, Landi, Acta Appl. Math. 109 (2010): matching cost.
"""

from specmap.distance.audit import position_audit, theorem_audit
from specmap.distance.bounds import (
    SLOPE_ONE_LIPSCHITZ,
    LocalBound,
    cell_error_bound,
    distance_upper_bound,
    line_upper_bound,
    lipschitz_constants,
    slope_one_sup_norm_max,
    value_range,
)
from specmap.distance.candidates import ORIGINS, special_candidates
from specmap.distance.compose import METHODS, TOLERANCE_FRACTION, matching_distance
from specmap.distance.dense import dense_sweep
from specmap.distance.evaluator import LineEvaluator, Progress, h_values
from specmap.distance.reduced import ReducedSettings, reduced_search
from specmap.distance.result import (
    Best,
    Candidates,
    DenseSweep,
    DistanceResult,
    ReducedSearch,
    SlopeOneSearch,
)
from specmap.distance.slope_one import slope_one_search
from specmap.distance.ties import tie_costs

__all__ = [
    "METHODS",
    "ORIGINS",
    "SLOPE_ONE_LIPSCHITZ",
    "TOLERANCE_FRACTION",
    "Best",
    "Candidates",
    "DenseSweep",
    "DistanceResult",
    "LineEvaluator",
    "LocalBound",
    "Progress",
    "ReducedSearch",
    "ReducedSettings",
    "SlopeOneSearch",
    "cell_error_bound",
    "dense_sweep",
    "distance_upper_bound",
    "h_values",
    "line_upper_bound",
    "lipschitz_constants",
    "matching_distance",
    "position_audit",
    "reduced_search",
    "slope_one_search",
    "slope_one_sup_norm_max",
    "special_candidates",
    "theorem_audit",
    "tie_costs",
    "value_range",
]
