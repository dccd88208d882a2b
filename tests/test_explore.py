"""The offline explorer (issue 15): the page built from a result folder, tested in headless Chromium.

The browser is Debian's chromium, driven through the DevTools protocol over
``--remote-debugging-pipe`` (JSON messages separated by NUL bytes on file descriptors
3 and 4; no port, no websocket). The result folder is a closed-form case built here:
vertical half-lines x = 0, 1 (f) and horizontal y = 0, 1 (g) tie equal on a = 1/2 and
half on a = 1/3 (math.md section 5, exact small cases); g's verticals x = 0.3, 1.3 tie
with f's on every line, so a patch of that tie is drawn.
"""

from __future__ import annotations

import base64
import json
import math
import os
import re
import shutil
import subprocess
import sys
import time
from pathlib import Path
from typing import Any

import numpy as np
import pytest

from specmap.explore import build_explorer
from specmap.explore.data import explorer_data
from specmap.report.load import load_results

FLAGS = [
    "--headless",
    "--no-sandbox",
    "--disable-gpu",
    "--disable-quic",
    "--no-first-run",
    "--disable-background-networking",
    "--disable-component-update",
    "--disable-sync",
    "--remote-debugging-pipe",
    "--window-size=1400,1000",
    "--hide-scrollbars",
    "--mute-audio",
]


def chromium() -> str | None:
    """Path of Debian's chromium (or a chromium-browser), or None."""
    for name in ("chromium", "chromium-browser"):
        found = shutil.which(name)
        if found:
            return found
    return None


class Browser:
    """One headless Chromium with one page; ``send`` a command, collect events (a test helper)."""

    def __init__(self, profile: Path) -> None:
        exe = chromium()
        if exe is None:
            raise RuntimeError("chromium is not installed")
        to_r, self._to_w = os.pipe()  # we write commands, chromium reads fd 3
        self._from_r, from_w = os.pipe()  # chromium writes fd 4, we read

        def remap() -> None:
            os.dup2(to_r, 3)
            os.dup2(from_w, 4)

        self.proc = subprocess.Popen(
            [exe, *FLAGS, f"--user-data-dir={profile}", "about:blank"],
            preexec_fn=remap,
            pass_fds=(3, 4),
            stdout=subprocess.DEVNULL,
            stderr=subprocess.DEVNULL,
        )
        os.close(to_r)
        os.close(from_w)
        os.set_blocking(self._from_r, False)
        self._buf = b""
        self._id = 0
        self.events: list[dict[str, Any]] = []
        self.session: str | None = None

    def _read(self, timeout: float) -> dict[str, Any] | None:
        end = time.monotonic() + timeout
        while b"\0" not in self._buf:
            try:
                chunk = os.read(self._from_r, 1 << 20)
            except BlockingIOError:
                chunk = None
            if chunk == b"":
                raise RuntimeError("chromium closed the pipe")
            if chunk:
                self._buf += chunk
                continue
            if time.monotonic() > end:
                return None
            time.sleep(0.01)
        msg, self._buf = self._buf.split(b"\0", 1)
        return json.loads(msg)

    def send(
        self,
        method: str,
        params: dict[str, Any] | None = None,
        *,
        timeout: float = 30.0,
        browser: bool = False,
    ) -> dict[str, Any]:
        """Send a command (to the page's session unless ``browser``) and return its result."""
        self._id += 1
        msg: dict[str, Any] = {"id": self._id, "method": method, "params": params or {}}
        if self.session and not browser:
            msg["sessionId"] = self.session
        os.write(self._to_w, json.dumps(msg).encode() + b"\0")
        end = time.monotonic() + timeout
        while time.monotonic() < end:
            reply = self._read(end - time.monotonic())
            if reply is None:
                break
            if reply.get("id") == self._id:
                if "error" in reply:
                    raise RuntimeError(f"{method}: {reply['error']}")
                return reply.get("result", {})
            self.events.append(reply)
        raise TimeoutError(f"no reply to {method} within {timeout} s")

    def open_page(self) -> None:
        target = self.send("Target.createTarget", {"url": "about:blank"}, browser=True)["targetId"]
        self.session = self.send(
            "Target.attachToTarget", {"targetId": target, "flatten": True}, browser=True
        )["sessionId"]
        for domain in ("Runtime", "Log", "Page"):
            self.send(f"{domain}.enable")

    def pump(self, seconds: float) -> None:
        """Collect events for a while."""
        end = time.monotonic() + seconds
        while time.monotonic() < end:
            msg = self._read(max(0.0, end - time.monotonic()))
            if msg is not None:
                self.events.append(msg)

    def evaluate(self, expression: str) -> Any:
        res = self.send(
            "Runtime.evaluate", {"expression": expression, "returnByValue": True, "awaitPromise": True}
        )
        if "exceptionDetails" in res:
            raise RuntimeError(f"page script failed: {res['exceptionDetails']}")
        return res.get("result", {}).get("value")

    def wait_for(self, expression: str, timeout: float = 60.0) -> Any:
        end = time.monotonic() + timeout
        while time.monotonic() < end:
            value = self.evaluate(expression)
            if value:
                return value
            self.pump(0.1)
        raise TimeoutError(f"{expression} stayed false for {timeout} s")

    def errors(self) -> list[str]:
        """Console errors, uncaught exceptions and error log entries seen so far."""
        out = []
        for e in self.events:
            m, p = e.get("method"), e.get("params") or {}
            if m == "Runtime.exceptionThrown":
                out.append(json.dumps(p.get("exceptionDetails"))[:500])
            elif m == "Runtime.consoleAPICalled" and p.get("type") in ("error", "assert"):
                out.append(json.dumps(p.get("args"))[:500])
            elif m == "Log.entryAdded" and (p.get("entry") or {}).get("level") == "error":
                out.append(json.dumps(p.get("entry"))[:500])
        return out

    def close(self) -> None:
        try:
            self.send("Browser.close", browser=True, timeout=5.0)
        except (RuntimeError, TimeoutError, OSError):
            pass
        try:
            self.proc.wait(timeout=10)
        except subprocess.TimeoutExpired:
            self.proc.kill()
            self.proc.wait()
        for fd in (self._to_w, self._from_r):
            try:
                os.close(fd)
            except OSError:
                pass


# -- the result folder ------------------------------------------------------------------------

FAR = -100.0  # half-lines start far away, so every line of the window meets all of them
TIES = [
    {"pairs": [["f:v0", "f:v1"], ["g:h0", "g:h1"]], "condition": "equal"},
    {"pairs": [["f:v0", "f:v1"], ["g:h0", "g:h1"]], "condition": "half"},
    {"pairs": [["f:v0", "g:v0"], ["f:v1", "g:v1"]], "condition": "equal"},
]
PATCH = [[0.6, -0.5], [0.9, -0.5], [0.9, 0.5], [0.6, 0.5], [0.6, -0.5]]


def make_folder(root: Path) -> Path:
    root.mkdir(parents=True)
    window = {"a": [0.02, 0.98], "b": [-1.0, 1.0]}
    grid_f = {
        "format": "specmap-grid/1",
        "route": "exact",
        "tolerance": 1e-9,
        "contours": [
            {"id": "f:v0", "kind": "vertical", "start": [0.0, FAR]},
            {"id": "f:v1", "kind": "vertical", "start": [1.0, FAR]},
            {"id": "f:p0", "kind": "proper", "points": [[-1.0, 1.0], [-0.5, 0.2], [0.0, -1.0]]},
        ],
    }
    grid_g = {
        "format": "specmap-grid/1",
        "route": "exact",
        "tolerance": 1e-9,
        "contours": [
            {"id": "g:h0", "kind": "horizontal", "start": [FAR, 0.0]},
            {"id": "g:h1", "kind": "horizontal", "start": [FAR, 1.0]},
            {"id": "g:v0", "kind": "vertical", "start": [0.3, FAR]},
            {"id": "g:v1", "kind": "vertical", "start": [1.3, FAR]},
        ],
    }
    b = np.linspace(-0.95, 0.95, 40).tolist()
    geo = {
        "type": "FeatureCollection",
        "features": [
            {
                "type": "Feature",
                "id": "c0",
                "properties": {"id": "c0", "kind": "patch"},
                "geometry": {
                    "type": "GeometryCollection",
                    "geometries": [
                        {"type": "Polygon", "coordinates": [PATCH]},
                        {
                            "type": "MultiLineString",
                            "coordinates": [[[1 / 3, x] for x in b], [[0.5, x] for x in b]],
                        },
                    ],
                },
            }
        ],
    }
    special = {
        "window": window,
        "tolerance": 1e-9,
        "pairs": "all",
        "method": "sweep",
        "resolution": [41, 41],
        "components": [
            {
                "id": "c0",
                "kind": "patch",
                "area": 0.3,
                "length": 3.8,
                "bbox": [1 / 3, -0.95, 0.9, 0.95],
                "ties": TIES,
                # tie 2: x(f:v0) - x(g:v0) = -0.3 = x(f:v1) - x(g:v1), the same gap with the same sign (closed form)
                "reasons": [
                    {
                        "kind": "equal_spacing",
                        "contours": ["f:v0", "g:v0", "f:v1", "g:v1"],
                        "component": "first",
                        "breaks_at": 1e-9,
                    }
                ],
            }
        ],
        "total_area": 0.3,
        "area_fraction": 0.3 / 1.92,
        "counts": {"curve": 0, "patch": 1, "point": 0},
    }
    a_s, b_s = np.linspace(0.02, 0.98, 25), np.linspace(-1.0, 1.0, 21)
    h = (a_s[None, :] + b_s[:, None]).tolist()  # h = a + b: bilinear interpolation is exact on it
    distance = {
        "value": 1.98,
        "at": [0.98, 1.0],
        "reached_on": "special",
        "tolerance": 1e-3,
        "by_degree": {"0": {"value": 1.98, "at": [0.98, 1.0]}},
        "landscape": {"a": a_s.tolist(), "b": b_s.tolist(), "h": h, "by_degree": {"0": h}},
    }
    study = {"name": "explore-fixture", "window": window, "commands": []}
    for name, obj in (
        ("study.json", study),
        ("grid_f.json", grid_f),
        ("grid_g.json", grid_g),
        ("special.json", special),
        ("special.geojson", geo),
        ("distance.json", distance),
    ):
        (root / name).write_text(json.dumps(obj))
    return root


def test_payload_labels_curves_and_patches(tmp_path: Path) -> None:
    data = explorer_data(load_results(make_folder(tmp_path / "r")))
    by_a = {round(c["xy"][0][0], 4): c for c in data["curves"]}
    assert by_a[0.3333]["ties"] == [1] and by_a[0.5]["ties"] == [0]  # closed form, see the module docstring
    assert data["patches"][0]["ties"] == [2] and data["components"][0]["patch_ties"] == [2]
    assert data["distance"]["samples"]["h"][0][0] == pytest.approx(0.02 - 1.0)


def test_page_is_self_contained(tmp_path: Path) -> None:
    page = build_explorer(make_folder(tmp_path / "r"))
    html = page.read_text(encoding="utf-8")
    assert page == tmp_path / "r" / "explore.html"
    assert not re.search(r"<script[^>]+src=|<link[^>]+href=|<img[^>]+src=", html)  # nothing fetched
    assert "plotly.js v" in html  # the chart library is inlined


def test_explore_cli_needs_the_special_set_or_a_distance(tmp_path: Path) -> None:
    root = make_folder(tmp_path / "r")
    (root / "special.json").unlink()
    (root / "distance.json").unlink()
    proc = subprocess.run(
        [sys.executable, "-m", "specmap", "explore", str(root)],
        capture_output=True,
        text=True,
        timeout=120,
        env={**os.environ, "PYTHONPATH": str(Path(__file__).resolve().parents[1])},
    )
    assert proc.returncode == 2 and proc.stderr.startswith("specmap: error:") and "specmap map" in proc.stderr
    assert "--method dense" in proc.stderr and len(proc.stderr.strip().splitlines()) == 1
    assert "Traceback" not in proc.stderr


def test_a_folder_without_special_set_gets_a_page_that_says_so(tmp_path: Path) -> None:
    # a scan pair whose map is refused as too large still has grids and a dense distance (issue 15)
    root = make_folder(tmp_path / "r")
    (root / "special.json").unlink()
    (root / "special.geojson").unlink()
    data = explorer_data(load_results(root), lines=False)
    assert data["special_missing"] and "special.json is missing" in data["special_missing"]
    assert data["components"] == [] and data["curves"] == [] and data["distance"]["samples"]
    full = explorer_data(load_results(make_folder(tmp_path / "full")), lines=False)
    assert full["special_missing"] is None


# -- in a real browser ----------------------------------------------------------------------


def _pointer(br: Browser, a: float, b: float, kind: str = "mouseMoved") -> None:
    p = json.loads(br.evaluate(f"JSON.stringify(window.explorer.toClient({a}, {b}))"))
    if kind == "click":
        for t in ("mousePressed", "mouseReleased"):
            br.send(
                "Input.dispatchMouseEvent",
                {"type": t, "x": p["x"], "y": p["y"], "button": "left", "clickCount": 1},
            )
    else:
        br.send("Input.dispatchMouseEvent", {"type": "mouseMoved", "x": p["x"], "y": p["y"]})


def _label_boxes(br: Browser) -> list[list[float]]:
    """Screen boxes [x0, y0, x1, y1] of the meet labels drawn on the grids chart."""
    js = (
        "JSON.stringify([...document.querySelectorAll('#grids .annotation-text')].filter(t => t.textContent)"
        ".map(t => { const r = t.getBoundingClientRect(); return [r.left, r.top, r.right, r.bottom]; }))"
    )
    return json.loads(br.evaluate(js))


def _overlap(p: list[float], q: list[float]) -> bool:
    return p[0] < q[2] - 0.5 and q[0] < p[2] - 0.5 and p[1] < q[3] - 0.5 and q[1] < p[3] - 0.5


def _text(br: Browser, element: str) -> str:
    return br.evaluate(f"document.getElementById('{element}').innerText") or ""


@pytest.mark.skipif(
    shutil.which("chromium") is None and shutil.which("chromium-browser") is None,
    reason="chromium is not installed (apt-get install -y chromium; .ci/run installs it)",
)
def test_explorer_in_headless_chromium(tmp_path: Path) -> None:
    root = make_folder(tmp_path / "r")
    # special.json counts more tie curves than the GeoJSON draws (coincident ones are merged there):
    # the headline says both, in the report's words (report/pdf.py, Special set page)
    sp = json.loads((root / "special.json").read_text())
    sp["stats"] = {"tie_curves": 9}
    (root / "special.json").write_text(json.dumps(sp))
    page = build_explorer(root)
    br = Browser(tmp_path / "profile")
    try:
        br.open_page()
        br.send("Page.navigate", {"url": page.resolve().as_uri()})
        assert br.wait_for("window.explorerReady === true", 90)
        br.pump(0.5)
        assert br.errors() == []
        # the headline's counts, pluralised (expected wording written here from the payload's counts)
        data = explorer_data(load_results(page.parent), lines=False)
        nc, nt = len(data["components"]), len(data["curves"])
        assert 0 < nt < 9
        word = (
            f"{nc} component" + ("" if nc == 1 else "s")
        ) + f", 9 tie curves ({nt} drawn, coincident ones merged)"
        assert word in _text(br, "headline")
        # D to the digits its tolerance resolves (1e-3: three decimals; the rule of report/fmt.py)
        assert _text(br, "headline").startswith("D = 1.980 (tolerance 0.001)")
        before = _text(br, "here-ab")
        # on the half tie's curve a = 1/3: |c_P| = min(a, 1-a) |x1 - x0| / a = 1 and |c_Q| = 1/2 (closed form)
        _pointer(br, 1 / 3, 0.23)  # between sample rows, so the interpolation is exercised
        br.wait_for("!document.getElementById('here-ab').innerText.startsWith('move')", 10)
        ab = _text(br, "here-ab")
        assert ab != before
        a, b = (float(x) for x in re.findall(r"-?\d+\.?\d*(?:e-?\d+)?", ab)[:2])
        assert abs(a - 1 / 3) < 0.01 and abs(b - 0.23) < 0.02
        h = float(re.search(r"h\(a, b\) = (-?[\d.]+)", _text(br, "here-h")).group(1))
        assert h == pytest.approx(a + b, abs=2e-3)  # h = a + b in the fixture, interpolated exactly
        # and h at the nearest sample node of make_folder's grid (a: 25 nodes on [0.02, 0.98], b: 21 on [-1, 1])
        m = re.search(r"nearest sample \((-?[\d.]+), (-?[\d.]+)\) h = (-?[\d.]+)", _text(br, "here-h"))
        assert m is not None, _text(br, "here-h")
        na, nb, nh = (float(x) for x in m.groups())
        assert na == pytest.approx(min(np.linspace(0.02, 0.98, 25), key=lambda x: abs(x - a)))
        assert nb == pytest.approx(min(np.linspace(-1.0, 1.0, 21), key=lambda x: abs(x - b)))
        assert nh == pytest.approx(na + nb, abs=5e-4)  # to the tolerance's three decimals
        ties = _text(br, "here-ties")
        assert "|f:v0 - f:v1| = 2 |g:h0 - g:h1|" in ties and "|c_P| = 1, |c_Q| = 0.5" in ties
        assert "|f:v0 - f:v1| = |g:h0 - g:h1|" not in ties  # the equal tie's curve is a = 1/2, far away
        assert ties.startswith("1 tie here")  # counted in words, not "tie(s)"
        m = (1 - a) / a  # r(a, b): y = (1-a)/a (x - b) - b, math.md section 2
        assert f"y = {m:.3g} x - {m * b + b:.3g}" in _text(br, "here-line")
        # the line is drawn over the grids and the tie's four contours are highlighted
        drawn = json.loads(
            br.evaluate(
                "JSON.stringify(document.getElementById('grids').data.slice(-3).map(t => (t.x || []).length))"
            )
        )
        assert drawn[0] > 0 and drawn[1] == 2 and drawn[2] >= 4
        # inside the patch the tie that holds identically is listed
        _pointer(br, 0.75, 0.0)
        br.pump(0.3)
        assert "|f:v0 - g:v0| = |f:v1 - g:v1|" in _text(br, "here-ties")
        assert "holds on patch c0" in _text(br, "here-ties")
        # the four contours' meets lie at x = 0, 0.3, 1, 1.3 on a nearly flat line (the y range spans the
        # far half-line starts): their labels would overlap; the ones drawn must not, the rest are named
        br.wait_for("document.querySelectorAll('#grids .annotation-text').length >= 2", 10)
        br.pump(0.3)
        boxes = _label_boxes(br)
        hidden = re.findall(r"[fg]:v\d c=", _text(br, "here-line"))
        assert len(boxes) + len(hidden) == 4 and len(boxes) >= 2
        assert not any(_overlap(p, q) for i, p in enumerate(boxes) for q in boxes[i + 1 :])
        _pointer(br, 0.5, -0.6, "click")
        br.pump(0.3)
        comp = _text(br, "comp-ties")
        assert "component c0" in comp and "3 ties" in comp
        assert "why: explained by equal spacing (1 identity) of the critical values of f1 and g1" in comp
        shot = br.send("Page.captureScreenshot", {"format": "png"})
        png = tmp_path / "explore.png"
        png.write_bytes(base64.b64decode(shot["data"]))
        assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n" and png.stat().st_size > 10_000
        assert br.errors() == []
    finally:
        br.close()


# -- slice diagrams and the optimal matching on the lines distance.json names ---------------------
# Sources: the bottleneck distance as the min over bijections of the augmented diagrams (each point
# may go to the diagonal at half its persistence, L-infinity cost between points; points at
# infinity match points at infinity at |u - u'|) [d'Amico, Frosini, Landi 2010; Edelsbrunner, Harer
# 2010, VIII.4], by brute force over all permutations below; and on a closed surface the sublevel
# filtration of F*(a, b) has one essential class in degree 0 born at the minimum of F* over the
# vertices and one in degree 2 born at its maximum (lower-star filtration), also brute-forced.

STUDY_TOML = """[study]
name = "lines"
[f]
surface = "ellipsoid"
radii = [1.0, 1.0, 1.0]
map = ["x", "y"]
resolution = 300
[g]
surface = "ellipsoid"
radii = [1.5, 1.0, 0.8]
map = ["x + 0.3*z", "y + 0.2"]
resolution = 300
"""
LINES = {
    "at": [0.5, 0.0],
    "by_degree": {"0": {"at": [0.5, 0.0]}, "1": {"at": [0.3, -0.2]}, "2": {"at": [0.7, 0.4]}},
}


def _brute_bottleneck(d1: list, d2: list) -> float:
    """min over bijections of the augmented diagrams of the max cost (the definition, by brute force)."""
    import itertools

    inf = math.inf
    a = [p for p in d1 if p[1] is not None]
    b = [p for p in d2 if p[1] is not None]
    u = sorted(p[0] for p in d1 if p[1] is None)
    v = sorted(p[0] for p in d2 if p[1] is None)
    if len(u) != len(v):
        return inf
    ess = min(
        (
            max((abs(x - y) for x, y in zip(u, p, strict=True)), default=0.0)
            for p in itertools.permutations(v)
        ),
        default=0.0,
    )
    left = a + [None] * len(b)  # None: a diagonal slot
    right = b + [None] * len(a)

    def cost(p: Any, q: Any) -> float:
        if p is None and q is None:
            return 0.0
        if p is None or q is None:
            r = p or q
            return (r[1] - r[0]) / 2
        return max(abs(p[0] - q[0]), abs(p[1] - q[1]))

    fin = min(
        (
            max((cost(left[i], right[j]) for i, j in enumerate(perm)), default=0.0)
            for perm in itertools.permutations(range(len(right)))
        ),
        default=0.0,
    )
    return max(ess, fin)


def _check_matching(d1: list, d2: list, pairs: list, h: float | None) -> None:
    """Every point once; each cost recomputed from the points; h the largest cost."""
    assert sorted(p[0] for p in pairs if p[0] is not None) == list(range(len(d1)))
    assert sorted(p[1] for p in pairs if p[1] is not None) == list(range(len(d2)))
    for i, j, c in pairs:
        p, q = (d1[i] if i is not None else None), (d2[j] if j is not None else None)
        if p is not None and q is not None:
            want = abs(p[0] - q[0]) if p[1] is None else max(abs(p[0] - q[0]), abs(p[1] - q[1]))
        else:
            r = p or q
            want = None if r[1] is None else (r[1] - r[0]) / 2
        assert (c is None and want is None) or c == pytest.approx(want, abs=1e-12)
    assert h == pytest.approx(max(c for _, _, c in pairs), abs=1e-12) if pairs else h == 0.0


def test_optimal_matching_against_brute_force() -> None:
    from specmap.explore.lines import optimal_matching

    rng = np.random.default_rng(3)
    for _ in range(40):
        n, m, k = int(rng.integers(0, 4)), int(rng.integers(0, 4)), int(rng.integers(0, 3))
        d1 = [[b, b + float(rng.uniform(0.01, 1))] for b in rng.uniform(0, 1, n)] + [
            [x, None] for x in rng.uniform(0, 1, k)
        ]
        d2 = [[b, b + float(rng.uniform(0.01, 1))] for b in rng.uniform(0, 1, m)] + [
            [x, None] for x in rng.uniform(0, 1, k)
        ]
        arr = lambda d: np.array([[p[0], np.inf if p[1] is None else p[1]] for p in d]).reshape(-1, 2)  # noqa: E731
        h, pairs = optimal_matching(arr(d1), arr(d2))
        assert h == pytest.approx(_brute_bottleneck(d1, d2), abs=1e-12)
        _check_matching(d1, d2, [[p.f, p.g, p.cost] for p in pairs], h)


def _mesh_folder(root: Path) -> Path:
    from specmap.fingerprint import inputs_part
    from specmap.study import load_study

    root.mkdir(parents=True)
    (root / "s.toml").write_text(STUDY_TOML)
    study = load_study(root / "s.toml")
    window = {"a": [0.02, 0.98], "b": [-1.0, 1.0]}
    st = {
        "name": "lines",
        "study_file": str(root / "s.toml"),
        "f": study.f.to_json(),
        "g": study.g.to_json(),
        "window": window,
        "commands": [],
        "fingerprint_parts": {"inputs": inputs_part(study)},
    }
    special = {
        "window": window,
        "tolerance": 1e-9,
        "components": [],
        "counts": {"curve": 0, "patch": 0, "point": 0},
        "total_area": 0.0,
    }
    for name, obj in (
        ("study.json", st),
        ("special.json", special),
        ("distance.json", {**LINES, "value": 0.5, "tolerance": 1e-3}),
    ):
        (root / name).write_text(json.dumps(obj))
    return root


def _vertex_values(root: Path, a: float, b: float) -> tuple[np.ndarray, np.ndarray]:
    """F*(a, b) at the vertices of f and g, from the formula (math.md section 2), not from specmap."""
    from specmap.pipeline import StudyRun
    from specmap.study import load_study

    out = []
    for shape in StudyRun(load_study(root / "s.toml"), show_progress=False).shapes:
        x, y = shape.values[:, 0], shape.values[:, 1]
        out.append(min(a, 1 - a) * np.maximum((x - b) / a, (y + b) / (1 - a)))
    return out[0], out[1]


def test_lines_carry_slice_diagrams_and_matchings_from_the_meshes(tmp_path: Path) -> None:
    root = _mesh_folder(tmp_path / "m")
    got = explorer_data(load_results(root))["lines"]
    assert got["why_not"] is None
    lines = got["lines"]
    assert [ln["label"] for ln in lines] == ["D, D_0", "D_1", "D_2"]  # one line per position, labels merged
    for ln in lines:
        vf, vg = _vertex_values(root, ln["a"], ln["b"])
        for k, want in (("0", (vf.min(), vg.min())), ("2", (vf.max(), vg.max()))):
            births = [[p[0] for p in ln["degrees"][k][s] if p[1] is None] for s in ("f", "g")]
            assert births[0] == [pytest.approx(want[0])] and births[1] == [pytest.approx(want[1])]
        for P in ln["degrees"].values():
            assert len(P["f"]) + len(P["g"]) <= 9  # small enough for the brute force
            assert P["h"] == pytest.approx(_brute_bottleneck(P["f"], P["g"]), abs=1e-12)
            _check_matching(P["f"], P["g"], P["pairs"], P["h"])
    # a study file edited since the run is refused, not shown
    (root / "s.toml").write_text(STUDY_TOML.replace("resolution = 300", "resolution = 310", 1))
    why = explorer_data(load_results(root))["lines"]
    assert why["lines"] is None and "changed since the run" in why["why_not"]


@pytest.mark.skipif(
    shutil.which("chromium") is None and shutil.which("chromium-browser") is None,
    reason="chromium is not installed (apt-get install -y chromium; .ci/run installs it)",
)
def test_slice_diagram_panel_in_headless_chromium(tmp_path: Path) -> None:
    root = _mesh_folder(tmp_path / "m")
    page = build_explorer(root)
    lines = explorer_data(load_results(root))["lines"]["lines"]
    br = Browser(tmp_path / "profile")
    try:
        br.open_page()
        br.send("Page.navigate", {"url": page.resolve().as_uri()})
        assert br.wait_for("window.explorerReady === true", 90)
        br.pump(0.5)
        assert br.errors() == []
        assert "D_1" in _text(br, "line-buttons")
        # a click on the D_2 diamond of the strip shows that line, its highest degree first
        _pointer(br, 0.7, 0.4, "click")
        br.pump(0.5)
        info = _text(br, "diagram-info")
        h = {k: v["h"] for k, v in lines[2]["degrees"].items()}
        top = max(h, key=lambda k: h[k])
        # h on the line to the digits the tolerance 1e-3 resolves: three decimals
        assert info.startswith("D_2:") and f"h_{top} = {h[top]:.3f}" in info
        assert "(a, b) = (0.7, 0.4)" in _text(br, "here-ab")  # the line is drawn over the grids too
        br.evaluate("document.querySelector('#degree-buttons button[data-k=\"0\"]').click()")
        br.pump(0.3)
        assert _text(br, "diagram-info").startswith("D_2: h_0")
        n_points = br.evaluate(
            "document.getElementById('diagram').data.slice(-2).map(t => t.x.length).join(',')"
        )
        assert n_points == f"{len(lines[2]['degrees']['0']['f'])},{len(lines[2]['degrees']['0']['g'])}"
        nf = len(lines[2]["degrees"]["0"]["f"])
        assert f"{nf} point{'' if nf == 1 else 's'} of f, " in _text(br, "diagram-info")
        shot = br.send("Page.captureScreenshot", {"format": "png"})
        (tmp_path / "lines.png").write_bytes(base64.b64decode(shot["data"]))
        assert br.errors() == []
    finally:
        br.close()


@pytest.mark.skipif(
    shutil.which("chromium") is None and shutil.which("chromium-browser") is None,
    reason="chromium is not installed (apt-get install -y chromium; .ci/run installs it)",
)
def test_page_without_special_set_in_headless_chromium(tmp_path: Path) -> None:
    root = make_folder(tmp_path / "r")
    (root / "special.json").unlink()
    (root / "special.geojson").unlink()
    page = build_explorer(root)
    br = Browser(tmp_path / "profile")
    try:
        br.open_page()
        br.send("Page.navigate", {"url": page.resolve().as_uri()})
        assert br.wait_for("window.explorerReady === true", 90)
        br.pump(0.3)
        assert br.errors() == []
        assert "no special set in this folder" in _text(br, "headline")
        _pointer(br, 0.4, 0.1)
        br.wait_for("!document.getElementById('here-ab').innerText.startsWith('move')", 10)
        a, b = (float(x) for x in re.findall(r"-?\d+\.?\d*(?:e-?\d+)?", _text(br, "here-ab"))[:2])
        assert abs(a - 0.4) < 0.01 and abs(b - 0.1) < 0.02  # the pointer's pixel, rounded
        h = float(re.search(r"h\(a, b\) = (-?[\d.]+)", _text(br, "here-h")).group(1))
        assert h == pytest.approx(a + b, abs=2e-3)  # h = a + b in the fixture (closed form, see make_folder)
        assert br.errors() == []
    finally:
        br.close()


def test_no_distance_says_why_there_are_no_slice_diagrams() -> None:
    from specmap.explore.lines import explorer_lines

    # specmap distance refuses a study of grid files (tests/test_cli_errors.py
    # test_distance_on_grid_only_study_says_so): the page must not advise running it
    grid = {"study": {"f": {"source": "grid"}, "g": {"source": "grid"}}, "distance": None}
    why = explorer_lines(grid)["why_not"]
    assert "grid files" in why and "run specmap distance" not in why
    mesh = {"study": {"f": {"source": "surface"}, "g": {"source": "mesh"}}, "distance": None}
    assert explorer_lines(mesh)["why_not"] == "no distance.json in this folder (run specmap distance)"


@pytest.mark.skipif(
    shutil.which("chromium") is None and shutil.which("chromium-browser") is None,
    reason="chromium is not installed (apt-get install -y chromium; .ci/run installs it)",
)
def test_grid_only_page_in_headless_chromium(tmp_path: Path) -> None:
    # as studies/ladder.toml: grid files, no distance.json, a window with a < 1/2 only
    root = make_folder(tmp_path / "r")
    (root / "distance.json").unlink()
    window = {"a": [0.05, 0.45], "b": [-1.0, 1.0]}
    for name in ("study.json", "special.json"):
        js = json.loads((root / name).read_text())
        js["window"] = window
        if name == "study.json":
            js["f"], js["g"] = {"source": "grid"}, {"source": "grid"}
        (root / name).write_text(json.dumps(js))
    # the half tie's curve a = 1/3 in 30 pieces: a family of more than 25 curves is drawn faint
    geo = json.loads((root / "special.geojson").read_text())
    b = np.linspace(-0.95, 0.95, 61)
    parts = geo["features"][0]["geometry"]["geometries"]
    parts[1]["coordinates"] = [[[1 / 3, b[k]], [1 / 3, b[k + 1]]] for k in range(0, 60, 2)]
    (root / "special.geojson").write_text(json.dumps(geo))
    page = build_explorer(root)
    br = Browser(tmp_path / "profile")
    try:
        br.open_page()
        br.send("Page.navigate", {"url": page.resolve().as_uri()})
        assert br.wait_for("window.explorerReady === true", 90)
        br.pump(0.3)
        assert br.errors() == []
        traces = json.loads(
            br.evaluate(
                "JSON.stringify(document.getElementById('strip').data.map(t => ({name: t.name, "
                "group: t.legendgroup || null, legend: t.showlegend !== false, opacity: t.opacity ?? 1})))"
            )
        )
        faint = [t for t in traces if t["opacity"] < 1]
        assert faint and all(t["name"].endswith("(30)") for t in faint)
        # each faint family has a legend entry at full strength in its group (opacity fades the swatch too)
        assert all(not t["legend"] for t in faint)
        assert all(
            any(u["legend"] and u["group"] == t["group"] and u["opacity"] == 1 for u in traces) for t in faint
        )
        notes = _text(br, "notes")
        assert "grid files" in notes and "run specmap distance" not in notes
        assert "interpolated" not in notes  # there are no samples of h to interpolate
        names = json.loads(
            br.evaluate("JSON.stringify(document.getElementById('strip').data.map(t => t.name))")
        )
        assert "a = 1/2" not in names  # the slope-one line lies outside this window: no legend entry
        assert "no distance.json" in _text(br, "here-h") or "no distance" in _text(br, "headline")
        assert br.errors() == []
    finally:
        br.close()
