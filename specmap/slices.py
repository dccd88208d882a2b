"""Slice diagrams: persistence of F*(a, b) on a triangle mesh, and their bottleneck distance.

For a map f = (f1, f2) given at the vertices of a closed triangulated surface,
the line r(a, b) of the parameter strip gives the normalised function

    F*(a, b)(p) = min(a, 1 - a) * max((f1(p) - b) / a, (f2(p) + b) / (1 - a))    [CDFFL13]

and its sublevel persistence diagrams (lower-star filtration of the mesh) are
the *slice diagrams*. Two maps are compared line by line with the bottleneck
distance [DFL10].

References
----------
.. [CDFFL13] Cerri, Di Fabio, Ferri, Frosini, Landi, "Betti numbers in
   multidimensional persistent homology are stable functions", Math. Methods
   Appl. Sci. 36 (2013).
.. [DFL10] d'Amico, Frosini, Landi, "Natural pseudo-distance and optimal
   matching between reduced size functions", Acta Appl. Math. 109 (2010).
"""

from __future__ import annotations

import math
from collections.abc import Iterable

import gudhi
import numpy as np

from specmap.bottleneck import exact_bottleneck
from specmap.meshtable import mesh_edges as mesh_edges  # re-exported: the one edge table
from specmap.shapes.model import require_mesh
from specmap.strip import star_values

DEGREES = (0, 1, 2)


def normalised_values(values: np.ndarray, a: float, b: float) -> np.ndarray:
    """F*(a, b) at every vertex, for one line (:func:`specmap.strip.star_values`, checked a in [0, 1]).

    The explicit forms of math.md section 2 also give the limit lines: ``a = 0``
    yields max(f1 - b, 0) and ``a = 1`` yields max(0, f2 + b).

    Parameters
    ----------
    values : ndarray (n, 2)
        (f1, f2) per vertex.
    a : float
        In [0, 1].
    b : float

    Returns
    -------
    ndarray (n,)

    References
    ----------
    .. [CDFFL13] Cerri et al., Math. Methods Appl. Sci. 36 (2013), the foliation method.

    Examples
    --------
    >>> normalised_values(np.array([[1.0, 2.0]]), 0.5, 0.0)
    array([2.])
    """
    a = float(a)
    if not 0.0 <= a <= 1.0:
        raise ValueError(f"a must lie in [0, 1], got {a}")
    return star_values(np.asarray(values, dtype=float), a, float(b))


class SliceEngine:
    """Slice diagrams of one meshed map, the simplex tree built once.

    Per line only the vertex values change: all filtration values are reset,
    the vertices receive F*(a, b), and every edge and triangle takes the max
    over its faces (lower-star filtration). Timed against rebuilding the tree
    and against inserting every simplex with its value, this path was the
    fastest (about 30 ms per line at 10k vertices, persistence included).

    Parameters
    ----------
    triangles : ndarray (m, 3) of int
    values : ndarray (n, 2)

    Examples
    --------
    >>> from specmap.shapes.surfaces import Ellipsoid
    >>> V, T = Ellipsoid((2.0, 1.0, 1.0)).mesh(200)
    >>> eng = SliceEngine(T, V[:, :2])
    >>> sorted(eng.diagrams(0.5, 0.0))
    [0, 1, 2]
    """

    def __init__(self, triangles: np.ndarray, values: np.ndarray) -> None:
        self.values = np.asarray(values, dtype=float)
        tri = np.asarray(triangles, dtype=np.int64)
        self.triangles = tri
        if self.values.ndim != 2 or self.values.shape[1] != 2:
            raise ValueError(f"values must have shape (n, 2), got {self.values.shape}")
        n = len(self.values)
        self._vertex_ids = np.arange(n, dtype=np.int64)[None, :]
        self._tree = gudhi.SimplexTree()
        self._tree.insert_batch(self._vertex_ids, np.zeros(n))
        self._tree.insert_batch(tri.T, np.zeros(len(tri)))

    @classmethod
    def from_shape(cls, shape) -> SliceEngine:
        """Engine of a :class:`~specmap.shapes.model.Shape` with a mesh.

        Raises
        ------
        MeshRequiredError
            When given no shape with a mesh (e.g. a grid read from a file).
        """
        shape = require_mesh(shape, "slice diagrams")
        return cls(shape.triangles, shape.values)

    def filtration_values(self, a: float, b: float) -> np.ndarray:
        return normalised_values(self.values, a, b)

    def diagrams(self, a: float, b: float, degrees: Iterable[int] = DEGREES) -> dict[int, np.ndarray]:
        """Persistence diagrams of F*(a, b), one (k, 2) array per degree.

        Deaths may be ``inf``; zero-length pairs are dropped.
        """
        x = self.filtration_values(a, b)
        st = self._tree
        st.reset_filtration(math.inf, 0)
        st.reset_filtration(-math.inf, 1)
        st.insert_batch(self._vertex_ids, x)  # keeps the min: inf -> x
        st.make_filtration_non_decreasing()  # edges, triangles <- max over faces
        st.compute_persistence(homology_coeff_field=2, min_persistence=0.0, persistence_dim_max=True)
        out: dict[int, np.ndarray] = {}
        for k in degrees:
            d = np.asarray(st.persistence_intervals_in_dimension(int(k)), dtype=float).reshape(-1, 2)
            out[int(k)] = d[d[:, 1] > d[:, 0]]
        return out


def slice_diagrams(shape, a: float, b: float, degrees: Iterable[int] = DEGREES) -> dict[int, np.ndarray]:
    """Slice diagrams of a shape on the line r(a, b) (builds an engine; see :class:`SliceEngine`).

    Examples
    --------
    >>> from specmap.shapes.model import Shape
    >>> from specmap.shapes.surfaces import Ellipsoid
    >>> V, T = Ellipsoid((2.0, 1.0, 1.0)).mesh(500)
    >>> d = slice_diagrams(Shape("f", "mesh", V, T, V[:, :2]), 0.5, 0.0)
    >>> d[2].round(2).tolist()  # 2.0 on the smooth surface; the 500-vertex mesh gives 1.998
    [[2.0, inf]]
    """
    return SliceEngine.from_shape(shape).diagrams(a, b, degrees)


def split_infinite(d: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """(finite points (k, 2), sorted births of the points at infinity)."""
    d = np.asarray(d, dtype=float).reshape(-1, 2)
    inf = np.isinf(d[:, 1])
    return d[~inf], np.sort(d[inf, 0])


def bottleneck(d1: np.ndarray, d2: np.ndarray) -> float:
    """Bottleneck distance between two diagrams that may contain points at infinity.

    Finite parts: :func:`specmap.bottleneck.exact_bottleneck`, an exact search over the
    matching costs with a maximum bipartite matching on the threshold graph. gudhi's
    ``bottleneck_distance`` alone was wrong on some inputs: with its default ``e`` it gave
    0.3976 where brute force and persim give 0.3205 (about 2 in 400 random 4-point
    diagrams), and with ``e=0`` 0.309 instead of 0.230; it now serves only as a starting guess.
    Points at infinity only match points at infinity, at cost |u - u'| [DFL10];
    the optimal such matching pairs them in sorted order of births (for
    sorted sequences, the sorted pairing minimises the largest |u - u'|).
    Different numbers of points at infinity give ``inf``.

    Parameters
    ----------
    d1, d2 : ndarray (k, 2)

    Returns
    -------
    float

    References
    ----------
    .. [DFL10] d'Amico, Frosini, Landi, Acta Appl. Math. 109 (2010): matching cost.

    Examples
    --------
    >>> bottleneck(np.array([[0.0, np.inf], [0.0, 1.0]]), np.array([[0.25, np.inf]]))
    0.5
    """
    f1, i1 = split_infinite(d1)
    f2, i2 = split_infinite(d2)
    if len(i1) != len(i2):
        return math.inf
    cost_inf = float(np.max(np.abs(i1 - i2))) if len(i1) else 0.0
    if len(f1) == 0 and len(f2) == 0:
        cost_fin = 0.0
    else:
        cost_fin = exact_bottleneck(f1, f2)
    return max(cost_inf, cost_fin)
