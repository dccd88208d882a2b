"""Upper bounds of h at every node of a lattice, from a few evaluated lines (stability, no diagram).

For lines p and q of the strip, stability of persistence applied to each map on its
own mesh and the triangle inequality for d_B give [CDFFL13]

    h_k(p) <= h_k(q) + ||F*_f(p) - F*_f(q)||_inf + ||F*_g(p) - F*_g(q)||_inf,

where F*_f(p) is the normalised function of f on the line p at f's vertices
(:func:`specmap.strip.star_values`); f and g may live on different meshes. Between
two lattice nodes, h moves by at most 2 (L_a |da| + L_b |db|)
(:func:`~specmap.distance.bounds.lipschitz_constants`), so on a lattice edge h is at
most the larger node bound plus L_a da (a horizontal edge) or L_b db (a vertical one):
any point of the edge is within half of it from an end.

The reduced search uses this map to look for ties only where their cost can be a
value of h: at the maximiser p* of a special value, t(p*) = h(p*) = D
(:mod:`specmap.special.focus`).

References
----------
.. [CDFFL13] Cerri, Di Fabio, Ferri, Frosini, Landi, "Betti numbers in multidimensional
   persistent homology are stable functions", Math. Methods Appl. Sci. (2013).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from specmap.distance.bounds import lipschitz_constants, star_rows
from specmap.distance.paths import normalise
from specmap.strip import Window


@dataclass(frozen=True)
class NodeBounds:
    """Upper bounds of h (max over the degrees searched) on a lattice of a window, in value units.

    Attributes
    ----------
    av, bv : ndarray
        Node coordinates along a (n_a,) and b (n_b,).
    upper : ndarray (n_b, n_a)
        h <= upper at each node.
    edge_a, edge_b : float
        What h can add between the two ends of a horizontal (along a) and a vertical edge.
    lines : int
        Evaluated lines the bounds come from.
    """

    av: np.ndarray
    bv: np.ndarray
    upper: np.ndarray
    edge_a: float
    edge_b: float
    lines: int

    def summary(self) -> dict[str, float | int]:
        """Quantiles of the node bounds (for the result's record)."""
        u = self.upper[np.isfinite(self.upper)]
        q = np.quantile(u, [0.0, 0.5, 1.0]) if u.size else [np.nan] * 3
        return {
            "lines": self.lines,
            "nodes": int(self.upper.size),
            "min": float(q[0]),
            "median": float(q[1]),
            "max": float(q[2]),
            "edge_a": self.edge_a,
            "edge_b": self.edge_b,
        }


def _moves(values: np.ndarray, A: np.ndarray, B: np.ndarray, qa: np.ndarray, qb: np.ndarray, idx: np.ndarray):
    """||F*(node) - F*(line idx[node, k])||_inf per node and neighbour: shape (nodes, K)."""
    Fq = star_rows(values, qa, qb)  # (M, n)
    out = np.empty(idx.shape)
    step = max(1, 4_000_000 // max(1, values.shape[0] * idx.shape[1]))
    for s in range(0, len(A), step):
        Fp = star_rows(values, A[s : s + step], B[s : s + step])  # (c, n)
        out[s : s + step] = np.abs(Fp[:, None, :] - Fq[idx[s : s + step]]).max(axis=2)
    return out


def node_upper_bounds(
    values_f: np.ndarray,
    values_g: np.ndarray,
    bounds: tuple,
    window: Window,
    av: np.ndarray,
    bv: np.ndarray,
    lines: np.ndarray,
    h: np.ndarray,
    *,
    near: int = 6,
) -> NodeBounds:
    """h <= upper at the nodes (av x bv) from h at evaluated ``lines`` (see the module text).

    Parameters
    ----------
    values_f, values_g : ndarray (n_f, 2), (n_g, 2)
        (f1, f2) at the vertices of each mesh.
    bounds : (bounds_f, bounds_g)
        Value bounds (min f1, min f2, max f1, max f2) of each map, for the Lipschitz constants.
    window : Window
    av, bv : ndarray
        Lattice node coordinates.
    lines : ndarray (M, 2)
        Evaluated lines (a, b).
    h : ndarray (M,)
        h at those lines (max over the degrees the bound is for; +inf allowed).
    near : int
        Evaluated lines tried per node (the nearest in the normalised window); each gives an
        upper bound, the smallest is kept.

    Returns
    -------
    NodeBounds
    """
    lines = np.asarray(lines, float).reshape(-1, 2)
    h = np.asarray(h, float).reshape(-1)
    L_a, L_b = lipschitz_constants(bounds[0], bounds[1], window)
    da = float(np.max(np.diff(av))) if len(av) > 1 else 0.0
    db = float(np.max(np.diff(bv))) if len(bv) > 1 else 0.0
    A, B = (x.ravel() for x in np.meshgrid(av, bv))
    if not len(lines):
        return NodeBounds(av, bv, np.full((len(bv), len(av)), np.inf), L_a * da, L_b * db, 0)
    P = normalise(np.c_[A, B], window)
    Q = normalise(lines, window)
    k = min(near, len(lines))
    d2 = ((P[:, None, :] - Q[None, :, :]) ** 2).sum(axis=2)
    idx = np.argpartition(d2, k - 1, axis=1)[:, :k] if k < len(lines) else np.tile(np.arange(k), (len(P), 1))
    move = _moves(values_f, A, B, lines[:, 0], lines[:, 1], idx) + _moves(
        values_g, A, B, lines[:, 0], lines[:, 1], idx
    )
    upper = (h[idx] + move).min(axis=1).reshape(len(bv), len(av))
    return NodeBounds(av, bv, upper, L_a * da, L_b * db, len(lines))
