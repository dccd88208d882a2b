"""Screenshot of a result folder's explorer page, as the README shows it (a helper script, not a test).

Usage (after ``specmap explore DIR``)::

    python3 tests/explore_shot.py results/demo reports/figures/explore.png

The page is opened in headless Chromium with the ``Browser`` helper of ``tests/test_explore.py``
(1400 x 1000 window); the strip is clicked on the line where D is reached (its slice diagrams and
matching are shown) and the pointer is moved a little above it (the tie there is listed, with its
four contours highlighted on the grids); then the visible page is captured as PNG. The script
stops with a message if the page logs a console error or an uncaught exception.
"""

from __future__ import annotations

import base64
import importlib.util
import json
import sys
from pathlib import Path

HERE = Path(__file__).resolve().parent


def _browser_module():  # type: ignore[no-untyped-def]
    spec = importlib.util.spec_from_file_location("_specmap_test_explore", HERE / "test_explore.py")
    assert spec is not None and spec.loader is not None
    mod = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(mod)
    return mod


def shoot(result_dir: Path, png: Path, profile: Path) -> list[str]:
    """Write the screenshot of ``result_dir/explore.html`` to ``png``; return the page's errors."""
    tx = _browser_module()
    page = result_dir / "explore.html"
    if not page.is_file():
        raise SystemExit(f"{page}: no explorer page (run specmap explore {result_dir} first)")
    br = tx.Browser(profile)
    try:
        br.open_page()
        br.send("Page.navigate", {"url": page.resolve().as_uri()})
        br.wait_for("window.explorerReady === true", 120)
        br.pump(0.5)
        at = json.loads(br.evaluate("JSON.stringify(DATA.distance && DATA.distance.at)") or "null")
        if at:
            a, b = float(at[0]), float(at[1])
            tx._pointer(br, a, b, "click")  # the D line: its slice diagrams and matching
            br.pump(0.5)
            tx._pointer(br, a, b + 0.005 * _b_span(br))  # just above it: the tie there
            br.pump(0.5)
        shot = br.send("Page.captureScreenshot", {"format": "png"})
        png.parent.mkdir(parents=True, exist_ok=True)
        png.write_bytes(base64.b64decode(shot["data"]))
        return list(br.errors())
    finally:
        br.close()


def _b_span(br) -> float:  # type: ignore[no-untyped-def]
    w = json.loads(br.evaluate("JSON.stringify(DATA.window.b)"))
    return float(w[1]) - float(w[0])


if __name__ == "__main__":
    if len(sys.argv) != 3:
        raise SystemExit("usage: python3 tests/explore_shot.py RESULT_DIR OUT.png")
    import tempfile

    with tempfile.TemporaryDirectory() as tmp:
        errs = shoot(Path(sys.argv[1]), Path(sys.argv[2]), Path(tmp) / "profile")
    if errs:
        raise SystemExit("the page logged errors:\n" + "\n".join(errs))
    print(f"screenshot: {sys.argv[2]}")
