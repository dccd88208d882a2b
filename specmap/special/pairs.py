"""Contour pairs, their roles, and the integer code of a tie.

A *pair* is an unordered pair of distinct contours of Γ(f) ∪ Γ(g); it is a
*cross* pair when one contour comes from each grid and a *same-grid* pair
otherwise. A *tie* is two different pairs P, Q with

- ``equal``: |c_P| = |c_Q| > 0, or
- ``half``:  |c_P| = 2 |c_Q| > 0 (P carries the larger difference),

where c_P is the difference of the push coordinates of the two contours of P.
Internally a tie is the integer ``cond * n² + P * n + Q`` (n pairs, cond 0 for
equal with P < Q, 1 for half with P the larger difference).

This module is the one home of the role rules of math.md section 5: which ties
a pair mode keeps (:func:`role_rules`, :func:`equal_allowed`,
:func:`half_allowed`, the flags :func:`kernel_flags` hands the compiled sweep),
which grid a contour id belongs to (:func:`grid_of`), and how the two
differences of a tie give its tied cost (:func:`tie_code`,
:func:`costs_from_differences`, :func:`tie_costs`).

References
----------
.. [EFQT23] Ethier, Frosini, Quercioli, Tombari, "Geometry of the matching
   distance for 2D filtering functions", J. Appl. Comput. Topol. (2023).
   Special values: ties between candidate bottleneck costs.
"""

from __future__ import annotations

import weakref
from dataclasses import dataclass
from functools import cached_property
from typing import Any

import numpy as np

from specmap.grids.model import Contour, Grid
from specmap.strip import line_parameter, push_scale

PAIR_MODES = ("all", "roles")
CONDITIONS = ("equal", "half")
SAME, CROSS = 0, 1
"""Pair classes: a same-grid pair (a point sent to the diagonal costs |c| / 2) and a cross pair
(two matched points cost |c|), math.md section 5."""


@dataclass(frozen=True, eq=False)
class RoleRules:
    """Which ties of two pair classes a pair mode keeps.

    Attributes
    ----------
    equal_ok : ndarray of bool (2, 2)
        ``equal_ok[class P, class Q]``: an equal tie |c_P| = |c_Q| is kept.
    half_ok : ndarray of bool (2, 2)
        ``half_ok[class big, class doubled]``: a half tie |c_big| = 2 |c_doubled| is kept.
    """

    equal_ok: np.ndarray
    half_ok: np.ndarray

    @property
    def doubled_ok(self) -> np.ndarray:
        """bool (2,): pairs of this class can be the doubled pair of a kept half tie."""
        return np.asarray(self.half_ok.any(axis=0))


def role_rules(mode: str) -> RoleRules:
    """The tie rules of a pair mode.

    ``all`` keeps every tie of two different pairs. ``roles`` keeps only ties of
    two candidate bottleneck costs (math.md section 5, role-aware refinement):
    equal ties of two cross pairs (two matching costs) or of two same-grid pairs
    (two diagonal costs), and half ties whose larger difference is a same-grid
    pair (diagonal cost |c_big| / 2) and whose doubled one is a cross pair
    (matching cost |c_doubled|).

    Raises
    ------
    ValueError
        If ``mode`` is not ``"all"`` or ``"roles"``.
    """
    if mode not in PAIR_MODES:
        raise ValueError(f"pairs must be one of {PAIR_MODES}, not {mode!r}")
    if mode == "all":
        return RoleRules(np.ones((2, 2), dtype=bool), np.ones((2, 2), dtype=bool))
    half = np.zeros((2, 2), dtype=bool)
    half[SAME, CROSS] = True
    return RoleRules(np.eye(2, dtype=bool), half)


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
        return Tie((p, q), condition)


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

    @cached_property
    def pair_class(self) -> np.ndarray:
        """:data:`CROSS` or :data:`SAME` of every pair (int64)."""
        return np.where(self.cross, CROSS, SAME).astype(np.int64)

    @cached_property
    def pair_names(self) -> list[tuple[str, str]]:
        """The sorted contour ids of every pair (as in a canonical :class:`Tie`)."""
        ids = self.ids
        return [
            tuple(sorted((ids[i], ids[j])))
            for i, j in zip(self.first.tolist(), self.second.tolist(), strict=True)
        ]

    @cached_property
    def rules(self) -> RoleRules:
        return role_rules(self.mode)

    def subset(self, kept: np.ndarray) -> PairTable:
        """The table of the pairs ``kept`` (indices into this table, increasing), same contours and mode.

        Tie codes of the subset number its own pairs; ties are read back by contour ids
        (:meth:`ties`), so pieces of a subset atlas name the same ties as the full one.
        """
        kept = np.asarray(kept, dtype=np.int64)
        return PairTable(
            self.contours, self.grid_of, self.first[kept], self.second[kept], self.cross[kept], self.mode
        )

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
        if not cond:
            return []
        if min(cond) < 0 or max(cond) >= len(CONDITIONS):
            raise ValueError(f"tie codes out of range for {self.n_pairs} pairs")
        # the canonical form of :meth:`Tie.make`, with each pair's sorted ids made once
        named = self.pair_names
        out = []
        for c, pp, qq in zip(cond, p, q, strict=True):
            a, b = named[pp], named[qq]
            if c == 0 and b < a:  # "equal": the pairs in order
                a, b = b, a
            out.append(Tie((a, b), CONDITIONS[c]))
        return out

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
    """Which equal ties (P, Q) the pair mode keeps (:func:`role_rules`).

    ``roles``: both cross pairs (two matching costs) or both same-grid pairs
    (two diagonal costs) -- math.md section 5, role-aware refinement.
    """
    p = np.asarray(p)
    q = np.asarray(q)
    cls = table.pair_class
    return (p != q) & table.rules.equal_ok[cls[p], cls[q]]


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
    cls = table.pair_class
    return (big != doubled) & table.rules.half_ok[cls[big], cls[doubled]]


def doubled_pairs(table: PairTable) -> np.ndarray:
    """bool per pair: whether 2 |c_Q| of pair Q takes part in any half tie the mode keeps."""
    return table.rules.doubled_ok[table.pair_class]


def kernel_flags(table: PairTable) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """The role rules as arrays for the compiled sweep (which derives no role itself).

    Returns
    -------
    pair_class : ndarray of int64 (n_pairs,)
    equal_ok, half_ok : ndarray of bool (2, 2)
        Indexed by pair classes, see :class:`RoleRules`.
    doubled : ndarray of bool (n_pairs,)
        :func:`doubled_pairs`.
    """
    r = table.rules
    return (
        np.ascontiguousarray(table.pair_class),
        np.ascontiguousarray(r.equal_ok),
        np.ascontiguousarray(r.half_ok),
        np.ascontiguousarray(doubled_pairs(table)),
    )


def all_tie_codes(table: PairTable) -> np.ndarray:
    """Every tie code the pair mode allows (the naive method's candidate list)."""
    n = table.n_pairs
    pg, qg = np.meshgrid(np.arange(n), np.arange(n), indexing="ij")
    p = pg.ravel()
    q = qg.ravel()
    eq = (p < q) & equal_allowed(table, p, q)
    hf = half_allowed(table, p, q)
    return np.concatenate(
        [table.encode(np.zeros(eq.sum()), p[eq], q[eq]), table.encode(np.ones(hf.sum()), p[hf], q[hf])]
    )


# ----------------------------------------------------------------------------------------------
# roles of ties given by contour ids (ties read from an atlas), and their tied costs
# ----------------------------------------------------------------------------------------------
EQUAL_CROSS, EQUAL_SAME, HALF_P, HALF_Q, ANY_EQUAL, ANY_HALF = range(6)
"""How the two differences d_P, d_Q of a tie give its tied cost (:func:`tie_code`)."""


def grid_of(contour_id: str) -> str | None:
    """The grid label of a contour id ``"<grid>:<rest>"`` (e.g. ``"f:p0"`` -> ``"f"``), else None.

    Examples
    --------
    >>> grid_of("f:p0"), grid_of("g:3:v1"), grid_of("v0")
    ('f', 'g', None)
    """
    return contour_id.split(":", 1)[0] if ":" in contour_id else None


def tie_code(tie: Tie, *, roles: bool = True) -> int | None:
    """How the tied cost of ``tie`` follows from its differences; ``None`` for a tie of no two costs.

    With roles known (every id ``"<grid>:..."``, see :func:`grid_of`, and ``roles=True``) the
    rules of :func:`role_rules` ``("roles")`` decide: an equal tie of two cross pairs is
    :data:`EQUAL_CROSS`, of two same-grid pairs :data:`EQUAL_SAME`; a half tie whose first pair
    is the same-grid one is :data:`HALF_P`, whose second pair is :data:`HALF_Q` (the tie read
    the other way round); any other tie compares costs of different kinds and gives ``None``
    (math.md section 5, role-aware refinement). Without roles: :data:`ANY_EQUAL` /
    :data:`ANY_HALF`.
    """
    (p1, p2), (q1, q2) = tie.pairs
    gp, gq = (grid_of(p1), grid_of(p2)), (grid_of(q1), grid_of(q2))
    if not roles or None in gp + gq:
        return ANY_EQUAL if tie.condition == "equal" else ANY_HALF
    cp = CROSS if gp[0] != gp[1] else SAME
    cq = CROSS if gq[0] != gq[1] else SAME
    rules = role_rules("roles")
    if tie.condition == "equal":
        if rules.equal_ok[cp, cq]:
            return EQUAL_CROSS if cp == CROSS else EQUAL_SAME
        return None
    if rules.half_ok[cp, cq]:
        return HALF_P
    if rules.half_ok[cq, cp]:
        return HALF_Q
    return None


def costs_from_differences(code: Any, dp: Any, dq: Any) -> tuple[np.ndarray, np.ndarray]:
    """(lo, hi) candidate bottleneck costs of ties from their :func:`tie_code` and differences.

    ``dp``, ``dq`` are |c_P|, |c_Q| (value units, broadcast with ``code``). Equal ties of cross
    pairs cost d, of same-grid pairs d / 2, without roles [d / 2, d]; half ties cost the smaller
    of d_big / 2 and d_small on either side (``lo``/``hi`` bracket both sides off the curve);
    a half tie whose same-grid pair has the smaller difference is NaN (math.md section 5).

    References
    ----------
    .. [EFQT23] Ethier, Frosini, Quercioli, Tombari, J. Appl. Comput. Topol. (2023).
    """
    code, dp, dq = np.broadcast_arrays(np.asarray(code), np.asarray(dp, float), np.asarray(dq, float))
    with np.errstate(invalid="ignore"):
        lo_d, hi_d = np.minimum(dp, dq), np.maximum(dp, dq)
        half_lo, half_hi = np.minimum(hi_d / 2, lo_d), np.maximum(hi_d / 2, lo_d)
        conds = [code == EQUAL_CROSS, code == EQUAL_SAME, code == ANY_EQUAL]
        lo = np.select(conds, [lo_d, lo_d / 2, lo_d / 2], half_lo)
        hi = np.select(conds, [hi_d, hi_d / 2, hi_d], half_hi)
        bad = ((code == HALF_P) & ~(dp >= dq)) | ((code == HALF_Q) & ~(dq >= dp))
    return np.where(bad, np.nan, lo), np.where(bad, np.nan, hi)


def tie_costs(
    tie: Tie, contours_by_id: dict, a: Any, b: Any, *, roles: bool = True
) -> tuple[np.ndarray, np.ndarray]:
    """Lower and upper candidate bottleneck cost of a tie at lines (a, b), in value units.

    With the differences d_P = |c_a - c_b|, d_Q = |c_c - c_d| of push
    coordinates (value units, min(a, 1-a) times the line-parameter difference):

    - ``equal`` (d_P = d_Q = d): two matching costs tie at d when both pairs are
      cross pairs (one contour of each grid), two diagonal costs tie at d/2
      when both are same-grid pairs; a mixed equal tie compares d with d/2 and is
      no tie of costs (math.md, role-aware refinement).
    - ``half`` (d_big = 2 d_small): the diagonal cost d_big/2 of a same-grid pair
      ties with the matching cost d_small of a cross pair: the tied cost is the
      smaller difference, d_small [EFQT23].

    Off the curve the two sides differ; ``lo`` and ``hi`` bracket both sides
    (min and max); on the curve both equal the tied cost t. Where the roles make
    the tie impossible, or a contour is not met, both are NaN. Without role
    information (ids without a grid prefix, or ``roles=False``) an equal tie
    brackets [d/2, d].

    Returns
    -------
    lo, hi : ndarray of the broadcast shape of a and b.

    References
    ----------
    .. [EFQT23] Ethier, Frosini, Quercioli, Tombari, J. Appl. Comput. Topol. (2023).
    """
    (p1, p2), (q1, q2) = tie.pairs
    a, b = np.broadcast_arrays(np.asarray(a, float), np.asarray(b, float))
    m = push_scale(a)
    s = [line_parameter(contours_by_id[c], a, b) for c in (p1, p2, q1, q2)]
    code = tie_code(tie, roles=roles)
    if code is None:
        return np.full(a.shape, np.nan), np.full(a.shape, np.nan)
    return costs_from_differences(code, np.abs(s[0] - s[1]) * m, np.abs(s[2] - s[3]) * m)
