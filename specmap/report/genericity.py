"""The genericity verdict in words: why the patches of a special set exist, and what a
perturbation study says against it.

Pure functions of ``special.json``-shaped data (the ``reasons`` of each patch component, written by
:mod:`specmap.special.reasons`: ``kind``, ``contours``, ``breaks_at``), shared by the report
(:mod:`specmap.report.summary`, the Special set page) and the perturbation study's own verdict
(:func:`specmap.perturb.summary.verdict`, ``perturb/summary.json`` and the CLI), so the two say the
same thing. A perturbation of the critical values larger than ``breaks_at`` breaks the identity
that makes a patch (math.md section 5); :func:`evidence` reads a perturbation result against it.
"""

from __future__ import annotations

import math
from typing import Any

from specmap.report.fmt import fmt, num, plural

REASON_WORDS = {
    "equal_spacing": "equal spacing",
    "central_symmetry": "central symmetry",
    "equal_values": "coincidence",
}
"""How each closed-form reason of special.json (:mod:`specmap.special.reasons`) is said."""
MAX_IDS = 8
"""Most contour ids quoted per reason; the rest are counted."""


def id_key(cid: str) -> tuple[str, str, int]:
    grid, _, rest = cid.partition(":")
    digits = "".join(ch for ch in rest if ch.isdigit())
    return (grid, rest.rstrip("0123456789"), int(digits) if digits else -1)


def ids_text(ids: set[str]) -> str:
    """``"f:v0, f:v1 and g:v0"`` (sorted by grid, kind, number; at most MAX_IDS quoted)."""
    xs = sorted(ids, key=id_key)
    if len(xs) > MAX_IDS:
        return ", ".join(xs[:MAX_IDS]) + f" and {len(xs) - MAX_IDS} more"
    return xs[0] if len(xs) == 1 else ", ".join(xs[:-1]) + " and " + xs[-1]


def values_of(ids: set[str]) -> str:
    """Which value components the half-lines are critical values of: ``"f1 and g1"``."""
    comp = {"v": "1", "h": "2"}
    names = sorted({i.split(":")[0] + comp[id_key(i)[1]] for i in ids if id_key(i)[1] in comp})
    return " and ".join(names) if names else "the maps"


def patch_reasons(sp: dict[str, Any]) -> list[list[dict[str, Any]]]:
    """The ``reasons`` list of every patch component (an empty list where none is recorded)."""
    return [
        [r for r in (c.get("reasons") or []) if isinstance(r, dict)]
        for c in sp.get("components") or []
        if c.get("kind") == "patch"
    ]


def breaking_size(sp: dict[str, Any], probed: bool = False) -> float:
    """The perturbation size above which every explained identity breaks: max ``breaks_at``, else nan.

    ``probed`` also takes the unexplained identities whose ``breaks_at`` the perturbation probe
    measured (:mod:`specmap.special.probe`); it is nan when one of them was not probed or not broken.
    """
    rs = [r for rs in patch_reasons(sp) for r in rs if probed or r.get("kind") != "unexplained"]
    xs = [num(r.get("breaks_at")) for r in rs]
    if probed and any(not math.isfinite(x) for x in xs):
        return math.nan
    xs = [x for x in xs if math.isfinite(x)]
    return max(xs) if xs else math.nan


def probe_clause(rs: list[dict[str, Any]]) -> str:
    """What the perturbation probe measured for the unexplained identities (a clause, or "")."""
    if not rs:
        return ""
    xs = [num(r.get("breaks_at")) for r in rs]
    probed = [r for r in rs if isinstance(r.get("probe"), dict)]
    if not probed:
        return "; breaks_at: not probed"
    if all(math.isfinite(x) for x in xs):
        return (
            f"; a perturbation probe (one contour moved) breaks {'it' if len(rs) == 1 else 'each'} "
            f"at a move of at most {fmt(max(xs), 3)}"
        )
    return "; the perturbation probe did not break every one of them (breaks_at: not found)"


def _groups(per: list[list[dict[str, Any]]]) -> tuple[dict[str, dict[str, set[str]]], dict[str, int]]:
    """Reasons by kind, then by the value components they concern (``"f1 and g1"``), with their ids;
    and the number of identities of each kind."""
    by_kind: dict[str, dict[str, set[str]]] = {}
    count: dict[str, int] = {}
    for rs in per:
        for r in rs:
            kind, ids = str(r.get("kind")), {str(x) for x in r.get("contours") or []}
            group = by_kind.setdefault(kind, {})
            key = values_of(ids) if kind != "unexplained" else ""
            group[key] = group.get(key, set()) | ids
            count[kind] = count.get(kind, 0) + 1
    return by_kind, count


def _explained_words(
    by_kind: dict[str, dict[str, set[str]]], count: dict[str, int], short: bool
) -> list[str]:
    """``["equal spacing (1 identity) of the critical values of f1 and g1", ...]`` (closed-form kinds)."""
    return [
        f"{REASON_WORDS.get(kind, kind.replace('_', ' '))} ({plural(count[kind], 'identity', 'identities')}) "
        "of the critical values of "
        + " and of ".join(
            vals if short else f"{vals} (contours {ids_text(ids)})" for vals, ids in sorted(groups.items())
        )
        for kind, groups in sorted(by_kind.items())
        if kind != "unexplained"
    ]


def reason_phrase(sp: dict[str, Any]) -> str | None:
    """The reasons of the patches as a short phrase, without contour lists (None without reasons).

    Examples
    --------
    >>> r = {"kind": "equal_spacing", "contours": ["f:v0", "f:v1", "g:v0", "g:v1"], "breaks_at": 1e-9}
    >>> u = {"kind": "unexplained", "contours": ["f:p0", "g:p0"], "breaks_at": None}
    >>> reason_phrase({"components": [{"kind": "patch", "reasons": [r, u]}]})
    'equal spacing (1 identity) of the critical values of f1 and g1 and 1 identity with no closed-form explanation'
    """
    per = patch_reasons(sp)
    if not any(per):
        return None
    by_kind, count = _groups(per)
    said = _explained_words(by_kind, count, short=True)
    if "unexplained" in count:
        said.append(
            f"{plural(count['unexplained'], 'identity', 'identities')} with no closed-form explanation"
        )
    return " and ".join(said)


def reason_sentence(sp: dict[str, Any], short: bool = False) -> str | None:
    """Why the patches exist, in the words of special.json's ``reasons`` (None without patches).

    ``short`` leaves out the contour lists (page 1 when they are long; the Special set page
    keeps them).

    Each patch component lists one reason per tie that holds on it identically
    (:func:`specmap.special.reasons.tie_reason`): ``equal_spacing`` or ``central_symmetry`` of
    half-line critical values (closed form), with the size ``breaks_at`` of a change of those
    values that breaks the identity, or ``unexplained``.

    Examples
    --------
    >>> r = {"kind": "equal_spacing", "contours": ["f:v0", "f:v1", "g:v0", "g:v1"], "breaks_at": 1e-9}
    >>> reason_sentence({"components": [{"kind": "patch", "reasons": [r]}]})
    'Why the patch exists: it is explained by equal spacing (1 identity) of the critical values of \
f1 and g1 (contours f:v0, f:v1, g:v0 and g:v1); a perturbation of these values larger than 1e-09 \
breaks it.'
    """
    per = patch_reasons(sp)
    if not per:
        return None
    n = len(per)
    if not any(per):
        return (
            f"Why the {'patch exists' if n == 1 else 'patches exist'}: not recorded (special.json has no "
            "reasons; rerun specmap map)."
        )
    by_kind, count = _groups(per)
    explained = sum(1 for rs in per if any(r.get("kind") != "unexplained" for r in rs))
    said = _explained_words(by_kind, count, short)
    head = f"Why the {'patch exists' if n == 1 else 'patches exist'}: "
    parts = []
    if explained:
        who = "it is" if n == 1 else ("they are" if explained == n else f"{explained} of the {n} are")
        br = breaking_size(sp)
        it = "it" if n == 1 else "them"
        parts.append(
            f"{who} explained by "
            + " and ".join(said)
            + (
                f"; a perturbation of these values larger than {fmt(br, 3)} breaks {it}"
                if math.isfinite(br)
                else ""
            )
        )
    if "unexplained" in by_kind:
        ids = by_kind["unexplained"][""]
        lone = n - explained
        whose = (
            f"{plural(lone, 'patch', 'patches')} {'has' if lone == 1 else 'have'}"
            if lone
            else "the patches have"
        )
        parts.append(
            f"{whose} {plural(count['unexplained'], 'identity', 'identities')} with no closed-form explanation ("
            + ("" if short else f"contours {ids_text(ids)}: ")
            + "proper contours, or vertical and horizontal half-lines mixed)"
            + probe_clause([r for rs in per for r in rs if r.get("kind") == "unexplained"])
        )
    return head + "; ".join(parts) + ("; the contours are listed on the Special set page." if short else ".")


def evidence(n_patch: int, breaks_at: float, kept: int, size: float) -> str:
    """How a perturbation result reads against the patch reasons: a clause ending in ``"."``.

    Parameters
    ----------
    n_patch : int
        Patches of the unperturbed special set (nothing to say without one: ``"."``).
    breaks_at : float
        :func:`breaking_size` of the base (nan when no explained identity records one).
    kept : int
        Perturbed runs that kept a patch.
    size : float
        The perturbation size of the runs.

    Examples
    --------
    >>> evidence(1, 1e-7, 0, 0.1)
    ": the patch is an artefact of a non-generic input, not of the pair's geometry, as its reasons predict (size 0.1 > 1e-07)."
    """
    if n_patch <= 0:
        return "."
    above = math.isfinite(breaks_at) and math.isfinite(size) and size > breaks_at
    one = n_patch == 1
    if kept == 0:
        tail = (
            f": the {'patch is an artefact' if one else 'patches are artefacts'} of a non-generic input, "
            "not of the pair's geometry"
        )
        why = "its reasons predict" if one else "their reasons predict"
        return tail + (f", as {why} (size {fmt(size, 3)} > {fmt(breaks_at, 3)})." if above else ".")
    if above:
        return (
            f": perturbations larger than the size {fmt(breaks_at, 3)} that breaks the explained identities left a "
            "patch, so some patch has another cause (look for unexplained identities)."
        )
    return "."
