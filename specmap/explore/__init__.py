"""The offline explorer: one self-contained HTML file built from a result folder.

>>> from specmap.explore import build_explorer     # doctest: +SKIP
>>> build_explorer("results/demo")                 # doctest: +SKIP
PosixPath('results/demo/explore.html')

The page inlines plotly.js (the bundle of the ``plotly`` package) and the data
(:func:`specmap.explore.data.explorer_data`), so it needs no server and no network.
"""

from __future__ import annotations

import json
import math
from pathlib import Path
from typing import Any

from specmap.errors import ResultsError
from specmap.io import check_out_dir

__all__ = ["build_explorer", "page_html"]


def _plain(x: Any) -> Any:
    """JSON-safe copy: non-finite floats become null (JSON has no NaN)."""
    if isinstance(x, float):
        return x if math.isfinite(x) else None
    if isinstance(x, dict):
        return {str(k): _plain(v) for k, v in x.items()}
    if isinstance(x, (list, tuple)):
        return [_plain(v) for v in x]
    return x


def _plotly_js() -> str:
    try:
        from plotly.offline import get_plotlyjs
    except ImportError:
        raise ResultsError(
            "the explorer needs the plotly package (it ships the chart library the page inlines)",
            field="plotly",
            fix="pip install plotly (or pip install -e .)",
        ) from None
    return get_plotlyjs()


def page_html(data: dict[str, Any], title: str) -> str:
    """The explorer page for a payload of :func:`specmap.explore.data.explorer_data`."""
    from specmap.explore.page import TEMPLATE

    payload = json.dumps(_plain(data), allow_nan=False, separators=(",", ":")).replace("</", "<\\/")
    safe = title.replace("&", "&amp;").replace("<", "&lt;").replace(">", "&gt;")
    return (
        TEMPLATE.replace("__TITLE__", safe)
        .replace("__DATA__", payload)
        .replace("__PLOTLY__", _plotly_js().replace("</script", "<\\/script"))
    )


def build_explorer(result_dir: str | Path, out: str | Path | None = None) -> Path:
    """Write ``explore.html`` for a result folder.

    Parameters
    ----------
    result_dir : str or Path
        A folder written by the pipeline; it needs ``special.json`` or ``distance.json`` (and
        for the full page ``special.geojson``, the grid files and both). Without ``special.json``
        (a map refused as too large, e.g. on scanned meshes) the page says so and shows the
        grids, h over the strip and the slice diagrams.
    out : str or Path, optional
        Output path; default ``<result_dir>/explore.html``.

    Returns
    -------
    Path

    Raises
    ------
    ResultsError
        The folder is missing, it holds neither ``special.json`` nor ``distance.json``, a result
        file is malformed, or
        the output cannot be written.
    """
    from specmap.explore.data import explorer_data
    from specmap.report.load import load_results

    res = load_results(result_dir)
    if res.get("special") is None and res.get("distance") is None:
        raise ResultsError(
            "neither special.json nor distance.json is in the result folder",
            file=str(Path(result_dir) / "special.json"),
            field="special.json",
            fix="run specmap map (the special set) or specmap distance first; when the map is refused as "
            "too large, specmap distance --method dense needs no map",
        )
    target = Path(out) if out is not None else Path(result_dir) / "explore.html"
    check_out_dir(target.parent, "--out")
    html = page_html(explorer_data(res), str(res["study"].get("name", Path(result_dir).name)))
    tmp = target.with_name(f".{target.name}.tmp")
    try:
        tmp.write_text(html, encoding="utf-8")
        tmp.replace(target)
    except BaseException:
        tmp.unlink(missing_ok=True)
        raise
    return target
