"""Is a measurement pair inside the theory? Constant components and functional dependence.

The special-value theorem and the Pareto-grid constructions assume a *normal* pair f = (f1, f2)
(math.md section 4): in particular neither component is constant and the Jacobi set (where the
tangential gradients of f1 and f2 are parallel) is a set of curves, not the whole surface. A pair
with f2 = phi(f1) has its Jacobi set everywhere; its "grids" are artefacts (thousands of contours,
a patch over the whole strip). This module detects the two failures that can be decided from
the data: a constant component and a pair whose gradients are parallel at every sample.

A user may insist on such a pair (``[f] insist = true`` in a study): the shape builder
(:func:`specmap.shapes.build.build_shape`) then keeps the reason :func:`degeneracy` gives in
``Shape.meta["not_normal"]`` instead of refusing, and the pipeline writes it as a caveat into every
result file and the report's first page.
"""

from __future__ import annotations

import numpy as np

#: relative size below which a tangential gradient, or the sine of the angle between the
#: two gradients, counts as zero (double precision with room for rounding in the Jacobian)
ZERO = 1e-9


def _unit_scale(x: np.ndarray, axis: tuple[int, ...] | None = None) -> np.ndarray:
    """``x`` divided by its largest finite absolute value (along the other axes), so that squares and
    products of its entries cannot overflow (a mesh with coordinates of 1e200 is scaled to 1)."""
    big = np.max(np.abs(np.where(np.isfinite(x), x, 0.0)), axis=axis, keepdims=axis is not None)
    return x / np.where(big > 0, big, 1.0)


RANGE = 1e75
"""Largest magnitude of a coordinate or a value specmap computes with. The mesh, grid, slice and
distance computations form products of up to four coordinates or value differences (the squared
norm of a cross product, 2 x 2 determinants of differences); below 1e75 these stay finite in
double precision (1e300 < 1.8e308), above it they overflow into inf and nan (measured: a mesh
scaled to 1e99 overflows in the mesh checks) and gave wrong grids with exit 0."""


def out_of_range(V: np.ndarray, values: np.ndarray) -> str | None:
    """Why the coordinates or values are too large to compute with (:data:`RANGE`), or None.

    >>> out_of_range(np.ones((3, 3)) * 1e150, np.ones((3, 2)))
    'coordinates up to 1e+150 exceed the supported range |x| <= 1e+75'
    >>> out_of_range(np.ones((3, 3)), np.ones((3, 2))) is None
    True
    """
    for what, arr in (("coordinates", V), ("values", values)):
        a = np.abs(np.asarray(arr, float))
        top = float(a[np.isfinite(a)].max(initial=0.0))
        if top > RANGE:
            return f"{what} up to {top:.3g} exceed the supported range |x| <= {RANGE:.0e}"
    return None


def vertex_normals(V: np.ndarray, T: np.ndarray) -> np.ndarray:
    """Unit area-weighted vertex normals (n, 3) of a triangle mesh (any coordinate scale)."""
    V = _unit_scale(np.asarray(V, float))  # normals do not change under a uniform scaling
    T = np.asarray(T, np.int64)
    fn = np.cross(V[T[:, 1]] - V[T[:, 0]], V[T[:, 2]] - V[T[:, 0]])
    n = np.zeros_like(V)
    for k in range(3):
        np.add.at(n, T[:, k], fn)
    norm = np.linalg.norm(n, axis=1, keepdims=True)
    return n / np.where(norm > 0, norm, 1.0)


def _symbolic(V: np.ndarray, T: np.ndarray, jac: np.ndarray) -> str | None:
    nrm = vertex_normals(V, T)
    jac = _unit_scale(jac, axis=(0, 2))  # each component by its own largest entry: the tests are ratios
    g = jac - np.einsum("nij,nj->ni", jac, nrm)[:, :, None] * nrm[:, None, :]  # tangential gradients
    mag = np.linalg.norm(g, axis=2)  # (n, 2)
    scale = np.linalg.norm(jac, axis=2).max(axis=0)
    for i in (0, 1):
        if mag[:, i].max() <= ZERO * max(scale[i], 1.0):
            return f"f{i + 1} is constant on the surface"
    sine = np.abs(np.einsum("nj,nj->n", np.cross(g[:, 0], g[:, 1]), nrm)) / np.maximum(
        mag[:, 0] * mag[:, 1], 1e-300
    )
    if sine.max() <= ZERO:
        return "the gradients of f1 and f2 are parallel everywhere (f2 is a function of f1)"
    return None


def _piecewise(V: np.ndarray, T: np.ndarray, values: np.ndarray) -> str | None:
    values = _unit_scale(values, axis=(0,))  # per component: the tests are ratios
    span = np.ptp(values, axis=0)
    size = np.abs(values).max(axis=0)
    for i in (0, 1):
        if span[i] <= ZERO * max(size[i], 1.0):
            return f"f{i + 1} is constant on the mesh"
    d1 = values[T[:, 1]] - values[T[:, 0]]  # (m, 2): change of (f1, f2) along the first edge
    d2 = values[T[:, 2]] - values[T[:, 0]]
    det = d1[:, 0] * d2[:, 1] - d2[:, 0] * d1[:, 1]
    norms = np.hypot(d1[:, 0], d2[:, 0]) * np.hypot(d1[:, 1], d2[:, 1])
    if np.all(np.abs(det) <= ZERO * np.maximum(norms, 1e-300)):
        return "f1 and f2 are affinely dependent on every triangle (f2 is a function of f1)"
    return None


def degeneracy(
    V: np.ndarray, T: np.ndarray, values: np.ndarray, jacobian: np.ndarray | None = None
) -> str | None:
    """Why the pair ``values`` on the mesh (V, T) is outside the theory, or None when it is not.

    Parameters
    ----------
    V : ndarray (n, 3)
        Vertices (length units).
    T : ndarray (m, 3) of int
        Triangles.
    values : ndarray (n, 2)
        f1, f2 at the vertices (value units).
    jacobian : ndarray (n, 2, 3), optional
        The exact Jacobian of a map of R^3 at the vertices; then the test is on tangential
        gradients (exact for symbolic maps); else on the PL interpolant per triangle.

    Returns
    -------
    str or None
        A sentence: which component is constant, or that the two are functionally dependent.

    Notes
    -----
    Smooth test: with t_i = grad f_i - (grad f_i . n) n the tangential gradients at a vertex with
    unit normal n, the pair is dependent where |(t_1 x t_2) . n| = |t_1||t_2| sin(angle) = 0. A
    normal pair has this only on its Jacobi set, a union of curves (math.md section 4), so the
    maximum of the sine over all vertices is 0 only when f2 is locally a function of f1
    everywhere. PL test: on a triangle the interpolants are affine and the 2 x 2 determinant of
    their changes along two edges vanishes iff their gradients are parallel there.

    Examples
    --------
    >>> V = np.array([[0., 0, 0], [1, 0, 0], [0, 1, 0], [0, 0, 1]])
    >>> T = np.array([[0, 2, 1], [0, 1, 3], [0, 3, 2], [1, 2, 3]])
    >>> degeneracy(V, T, np.c_[V[:, 0], 2 * V[:, 0] + 1])
    'f1 and f2 are affinely dependent on every triangle (f2 is a function of f1)'
    >>> degeneracy(V, T, V[:, :2]) is None
    True
    """
    V = np.asarray(V, float)
    T = np.asarray(T, np.int64)
    vals = np.asarray(values, float)
    return _symbolic(V, T, np.asarray(jacobian, float)) if jacobian is not None else _piecewise(V, T, vals)
