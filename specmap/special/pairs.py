"""Contour pairs, their roles, and the integer code of a tie.

A *pair* is an unordered pair of distinct contours of Γ(f) ∪ Γ(g); it is a
*cross* pair when one contour comes from each grid and a *same-grid* pair
otherwise. A *tie* is two different pairs P, Q with

- ``equal``: |c_P| = |c_Q| > 0, or
- ``half``:  |c_P| = 2 |c_Q| > 0 (P carries the larger difference),

where c_P is the difference of the push coordinates of the two contours of P.
Internally a tie is the integer ``cond * n² + P * n + Q`` (n pairs, cond 0 for
equal with P < Q, 1 for half with P the larger difference).

References
----------
.. [EFQT23] Ethier, Frosini, Quercioli, Tombari, "Geometry of the matching
   distance for 2D filtering functions", J. Appl. Comput. Topol. (2023).
   Special values: ties between candidate bottleneck costs.
"""

from __future__ import annotations

import weakref
from dataclasses import dataclass
from typing import Any

import numpy as np

from specmap.grids.model import Contour, Grid

PAIR_MODES = ("all", "roles")
CONDITIONS = ("equal", "half")


@dataclass(frozen=True)
class Tie:
    """A tie between two pairs of contours, in canonical form.

    Attributes
    ----------
    pairs : ((id, id), (id, id))
        Each pair sorted by id. For ``equal`` the two pairs are sorted too; for
        ``half`` the first pair carries the larger difference, the second the
        one that is doubled.
    condition : {"equal", "half"}
    """

    pairs: tuple[tuple[str, str], tuple[str, str]]
    condition: str

    def to_json(self) -> dict[str, Any]:
        return {"pairs": [list(p) for p in self.pairs], "condition": self.condition}

    @staticmethod
    def make(p: tuple[str, str], q: tuple[str, str], condition: str) -> Tie:
        """Canonical tie from two pairs of ids (``p`` larger for ``half``)."""
        if condition not in CONDITIONS:
            raise ValueError(f"condition must be one of {CONDITIONS}, not {condition!r}")
        p = tuple(sorted(p))  # type: ignore[assignment]
        q = tuple(sorted(q))  # type: ignore[assignment]
        if condition == "equal" and q < p:
            p, q = q, p
        return Tie((p, q), condition)  # type: ignore[arg-type]


def tie_from_json(d: dict[str, Any]) -> Tie:
    """Inverse of :meth:`Tie.to_json`."""
    (a, b), (c, e) = d["pairs"]
    return Tie.make((a, b), (c, e), d["condition"])


@dataclass(frozen=True, eq=False)
class PairTable:
    """All contours of the two grids and all their pairs.

    Attributes
    ----------
    contours : tuple of Contour
        Contours of f, then of g (ids unique).
    grid_of : ndarray of int
        0 for a contour of f, 1 for one of g.
    first, second : ndarray of int
        Contour indices of each pair (first < second).
    cross : ndarray of bool
        Whether each pair is a cross pair.
    mode : {"all", "roles"}
        Which ties are kept (see :func:`equal_allowed`, :func:`half_allowed`).
    """

    contours: tuple[Contour, ...]
    grid_of: np.ndarray
    first: np.ndarray
    second: np.ndarray
    cross: np.ndarray
    mode: str

    @property
    def n_pairs(self) -> int:
        return int(self.first.size)

    @property
    def ids(self) -> list[str]:
        return [c.id for c in self.contours]

    def pair_ids(self, p: int) -> tuple[str, str]:
        return (self.contours[self.first[p]].id, self.contours[self.second[p]].id)

    def decode(self, codes: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Tie codes -> (cond, P, Q) arrays."""
        n = self.n_pairs
        codes = np.asarray(codes, dtype=np.int64)
        cond, rest = np.divmod(codes, n * n)
        p, q = np.divmod(rest, n)
        return cond, p, q

    def encode(self, cond: np.ndarray, p: np.ndarray, q: np.ndarray) -> np.ndarray:
        n = self.n_pairs
        return (np.asarray(cond, np.int64) * n + np.asarray(p, np.int64)) * n + np.asarray(q, np.int64)

    def tie(self, code: int) -> Tie:
        return self.ties(np.array([code]))[0]

    def ties(self, codes: np.ndarray) -> list[Tie]:
        """:meth:`tie` of many codes (one decode)."""
        cond, p, q = (x.tolist() for x in self.decode(np.asarray(codes, np.int64)))
        ids = self.ids
        f, g = self.first.tolist(), self.second.tolist()
        return [Tie.make((ids[f[pp]], ids[g[pp]]), (ids[f[qq]], ids[g[qq]]), CONDITIONS[c])
                for c, pp, qq in zip(cond, p, q, strict=True)]

    def tie_contours(self, codes: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Contour indices (k, 4) = (P.first, P.second, Q.first, Q.second) and factors (1 or 2).

        The result for the last large ``codes`` array is kept (the atlas asks for the
        same crossings' contours at several stages); treat the returned arrays as read-only.
        """
        cached = self.__dict__.get("_slots_cache")
        if cached is not None and cached[0]() is codes:
            return cached[1]
        cond, p, q = self.decode(codes)
        slots = np.stack([self.first[p], self.second[p], self.first[q], self.second[q]], axis=-1)
        out = slots, np.where(cond == 1, 2.0, 1.0)
        if isinstance(codes, np.ndarray) and codes.size >= 100_000:
            object.__setattr__(self, "_slots_cache", (weakref.ref(codes), out))
        return out


def pair_table(grid_f: Grid, grid_g: Grid, mode: str = "all") -> PairTable:
    """Build the :class:`PairTable` of two grids.

    Ids that collide between the grids are re-prefixed ``"f:"`` / ``"g:"``.

    Raises
    ------
    ValueError
        If ``mode`` is not ``"all"`` or ``"roles"``.
    """
    if mode not in PAIR_MODES:
        raise ValueError(f"pairs must be one of {PAIR_MODES}, not {mode!r}")
    cf = list(grid_f.contours)
    cg = list(grid_g.contours)
    if {c.id for c in cf} & {c.id for c in cg} or len({c.id for c in cf + cg}) != len(cf + cg):
        cf = [Contour(f"f:{i}:{c.id.split(':', 1)[-1]}", c.kind, c.points) for i, c in enumerate(cf)]
        cg = [Contour(f"g:{i}:{c.id.split(':', 1)[-1]}", c.kind, c.points) for i, c in enumerate(cg)]
    contours = tuple(cf + cg)
    grid_of = np.array([0] * len(cf) + [1] * len(cg), dtype=np.int8)
    first, second = np.triu_indices(len(contours), k=1)
    cross = grid_of[first] != grid_of[second]
    return PairTable(contours, grid_of, first.astype(np.int64), second.astype(np.int64), cross, mode)


def equal_allowed(table: PairTable, p: np.ndarray, q: np.ndarray) -> np.ndarray:
    """Which equal ties (P, Q) the pair mode keeps.

    ``roles``: both cross pairs (two matching costs) or both same-grid pairs
    (two diagonal costs) -- math.md section 5, role-aware refinement.
    """
    p = np.asarray(p)
    q = np.asarray(q)
    ok = p != q
    if table.mode == "roles":
        ok &= table.cross[p] == table.cross[q]
    return ok


def half_allowed(table: PairTable, big: np.ndarray, doubled: np.ndarray) -> np.ndarray:
    """Which half ties |c_big| = 2 |c_doubled| the pair mode keeps.

    ``roles``: the larger difference ``big`` is a same-grid pair and the
    smaller ``doubled`` one a cross pair. A same-grid pair stands for a point
    sent to the diagonal, whose cost is |c_big| / 2; a cross pair for two
    matched points, whose cost is |c_doubled|. The two costs tie exactly when
    |c_big| = 2 |c_doubled| (math.md section 5, role-aware refinement).
    """
    big = np.asarray(big)
    doubled = np.asarray(doubled)
    ok = big != doubled
    if table.mode == "roles":
        ok &= ~table.cross[big] & table.cross[doubled]
    return ok


def all_tie_codes(table: PairTable) -> np.ndarray:
    """Every tie code the pair mode allows (the naive method's candidate list)."""
    n = table.n_pairs
    p, q = np.meshgrid(np.arange(n), np.arange(n), indexing="ij")
    p = p.ravel()
    q = q.ravel()
    eq = (p < q) & equal_allowed(table, p, q)
    hf = half_allowed(table, p, q)
    return np.concatenate([table.encode(np.zeros(eq.sum()), p[eq], q[eq]),
                           table.encode(np.ones(hf.sum()), p[hf], q[hf])])
