"""The explorer page: HTML, a little CSS and the DOM glue around plotly.js (inlined).

The charts (zoom, pan, traces) are plotly.js, the minified bundle the ``plotly``
Python package ships, inlined into the page so that it opens from disk with no
network. The glue below only converts pointer pixels to (a, b) with plotly's own
axis functions, interpolates h, intersects the line r(a, b) with the contours
(push coordinates, math.md section 2) and writes the panels.

The slice-diagram panel draws, for the lines computed when the page was written
(:mod:`specmap.explore.lines`), both persistence diagrams of one degree, the optimal
matching and its costliest pair; clicking near a diamond on the strip or a line button
shows it.

Element ids the tests read: ``here-ab``, ``here-h``, ``here-line``, ``here-ties``,
``comp-ties``, ``line-buttons``, ``degree-buttons``, ``diagram``, ``diagram-info``;
``window.explorerReady`` is true once the charts are drawn, and ``window.explorer`` exposes
``update(a, b)``, ``select(a, b)``, ``toClient(a, b)`` and ``showLine(i, degree)``.
"""

from __future__ import annotations

TEMPLATE = """<!DOCTYPE html>
<html lang="en">
<head>
<meta charset="utf-8">
<title>specmap explorer: __TITLE__</title>
<style>
  body { font-family: "DejaVu Sans", Arial, sans-serif; margin: 12px 16px; color: #222; font-size: 14px; }
  h1 { font-size: 19px; margin: 0 0 4px 0; }
  .sub { color: #555; margin-bottom: 8px; }
  #charts { display: flex; gap: 10px; }
  #strip { flex: 58; height: 640px; border: 1px solid #ddd; position: relative; }
  #grids { flex: 42; height: 640px; border: 1px solid #ddd; }
  #cross { position: absolute; width: 13px; height: 13px; margin: -8px 0 0 -8px; border: 2px solid #c2185b;
           border-radius: 50%; pointer-events: none; display: none; z-index: 10; }
  #panels { display: flex; gap: 14px; margin-top: 10px; }
  section { flex: 1; border: 1px solid #ddd; padding: 8px 10px; min-height: 130px; }
  section h2 { font-size: 15px; margin: 0 0 6px 0; }
  .mono { font-family: "DejaVu Sans Mono", monospace; font-size: 12.5px; }
  .tie { margin: 2px 0; }
  .held { color: #1b6e3c; }
  .why { margin: 4px 0; color: #1b6e3c; }
  .muted { color: #666; }
  #comp-ties { max-height: 260px; overflow-y: auto; }
  #lines-panel { flex: 1.7; }
  #diagram { height: 330px; }
  button { font-size: 12px; margin: 0 4px 4px 0; padding: 2px 6px; border: 1px solid #aaa; background: #f6f6f6;
           border-radius: 3px; cursor: pointer; }
  button.on { background: #c2185b; color: white; border-color: #c2185b; }
</style>
<script>__PLOTLY__</script>
</head>
<body>
<h1>specmap explorer: __TITLE__</h1>
<div class="sub" id="headline"></div>
<div id="charts"><div id="strip"></div><div id="grids"></div></div>
<div id="panels">
  <section><h2>At the pointer</h2>
    <div id="here-ab" class="mono">move the pointer over the strip</div>
    <div id="here-h" class="mono"></div>
    <div id="here-line" class="mono"></div>
    <div id="here-ties"></div>
  </section>
  <section><h2>Clicked component</h2><div id="comp-ties" class="muted">click the strip to list the ties of
    the component there (a patch containing the point, else the nearest tie curve)</div></section>
  <section id="lines-panel"><h2>Slice diagrams and the optimal matching</h2>
    <div id="line-buttons"></div>
    <div id="degree-buttons"></div>
    <div id="diagram"></div>
    <div id="diagram-info" class="mono"></div>
    <div class="muted" id="notes"></div>
  </section>
</div>
<script type="application/json" id="data">__DATA__</script>
<script>
"use strict";
const DATA = JSON.parse(document.getElementById("data").textContent);
const COLOURS = ["#1f77b4", "#d62728", "#2ca02c", "#9467bd", "#ff7f0e", "#17becf", "#8c564b"];
const GRID_COLOURS = {f: "#1f5fa8", g: "#d9730d"};
const W = DATA.window;
const fmt = (x, d) => (x === null || x === undefined || !isFinite(x)) ? "n/a" : Number(x).toPrecision(d || 4)
  .replace(/(\\.\\d*?)0+(e|$)/, "$1$2").replace(/\\.(e|$)/, "$1");
// values of h to the digits their tolerance resolves (the rule of report/fmt.py; decimals from the payload)
function fmtTo(x, dec) {
  if (x === null || x === undefined) return "n/a";
  if (!isFinite(x)) return x > 0 ? "inf" : (x < 0 ? "-inf" : "n/a");
  if (dec === null || dec === undefined) return fmt(x);
  if (x !== 0) dec = Math.min(dec, Math.max(0, DATA.distance.max_digits - 1 - Math.floor(Math.log10(Math.abs(x)))));
  const s = Number(x).toFixed(dec);
  return /^-0(\\.0*)?$/.test(s) ? s.slice(1) : s;
}
const fmtH = x => fmtTo(x, DATA.distance ? DATA.distance.decimals : null);
const fmtMap = x => fmtTo(x, DATA.distance ? DATA.distance.map_decimals : null);
const esc = s => String(s).replace(/[&<>]/g, c => ({"&": "&amp;", "<": "&lt;", ">": "&gt;"}[c]));
function famColour(f) { const i = DATA.families.indexOf(f); return (i >= 0 && i < COLOURS.length) ? COLOURS[i] : "#8a8a8a"; }
function tieText(t) {
  const p = t.pairs.map(q => q.join(" - "));
  return t.condition === "half" ? "|" + p[0] + "| = 2 |" + p[1] + "|" : "|" + p[0] + "| = |" + p[1] + "|";
}
const contours = {};
for (const g of ["f", "g"]) for (const c of DATA.grids[g]) contours[c.id] = Object.assign({grid: g}, c);
const comps = {};
for (const c of DATA.components) comps[c.id] = c;

// -- value-plane extent (for half-lines) ------------------------------------------------------
let lo = [Infinity, Infinity], hi = [-Infinity, -Infinity];
for (const id in contours) {
  const c = contours[id], pts = c.kind === "proper" ? c.points : [c.start];
  for (const p of pts) for (const k of [0, 1]) { lo[k] = Math.min(lo[k], p[k]); hi[k] = Math.max(hi[k], p[k]); }
}
if (!isFinite(lo[0])) { lo = [0, 0]; hi = [1, 1]; }
const span = [Math.max(hi[0] - lo[0], 1e-9), Math.max(hi[1] - lo[1], 1e-9)];
const X0 = lo[0] - 0.08 * span[0], X1 = hi[0] + 0.12 * span[0], Y0 = lo[1] - 0.08 * span[1], Y1 = hi[1] + 0.12 * span[1];
function contourXY(c) {
  if (c.kind === "proper") return [c.points.map(p => p[0]), c.points.map(p => p[1])];
  if (c.kind === "vertical") return [[c.start[0], c.start[0]], [c.start[1], Y1]];
  return [[c.start[0], X1], [c.start[1], c.start[1]]];
}

// -- the strip ----------------------------------------------------------------------------------
const stripTraces = [];
DATA.patches.forEach((p, i) => stripTraces.push({type: "scatter", mode: "lines", x: p.ring.map(q => q[0]),
  y: p.ring.map(q => q[1]), fill: "toself", fillcolor: "rgba(159,216,181,0.55)", line: {color: "#1b6e3c", width: 1.2},
  name: "patches", legendgroup: "patch", showlegend: i === 0, hoverinfo: "skip"}));
const byFam = {};
for (const c of DATA.curves) { (byFam[c.family] = byFam[c.family] || []).push(c); }
for (const f of DATA.families) {
  const x = [], y = [];
  for (const c of byFam[f] || []) { for (const q of c.xy) { x.push(q[0]); y.push(q[1]); } x.push(null); y.push(null); }
  const n = (byFam[f] || []).length;
  // a large family is drawn faint so that the overplot reads as density; its legend entry is a
  // separate full-strength swatch (a trace's opacity also fades its legend line: knob's 2307 curves
  // left an invisible swatch), in the same legend group so a click on it still hides the family
  stripTraces.push({type: "scatter", mode: "lines", x: x, y: y, name: f + " (" + n + ")", hoverinfo: "skip",
    legendgroup: "fam " + f, showlegend: false,
    line: {color: famColour(f), width: 1}, opacity: Math.min(1, Math.max(0.12, 25 / Math.max(n, 1)))});
  stripTraces.push({type: "scatter", mode: "lines", x: [null], y: [null], name: f + " (" + n + ")", hoverinfo: "skip",
    legendgroup: "fam " + f, line: {color: famColour(f), width: 2}});
}
if (W.a[0] <= 0.5 && 0.5 <= W.a[1])  // no legend entry for a line outside the window (ladder: a up to 0.45)
  stripTraces.push({type: "scatter", mode: "lines", x: [0.5, 0.5], y: W.b, name: "a = 1/2", hoverinfo: "skip",
    line: {color: "#555", width: 1, dash: "dot"}});
const D = DATA.distance;
if (D && D.at) stripTraces.push({type: "scatter", mode: "markers", x: [D.at[0]], y: [D.at[1]], hoverinfo: "skip",
  name: "D = " + D.text + " reached here", marker: {symbol: "star", size: 16, color: "#ff3b3b",
  line: {color: "black", width: 1}}});
const stripLayout = {margin: {l: 55, r: 10, t: 30, b: 40}, title: {text: "special set in the strip"
  + (DATA.costs_band ? ", tied costs in [" + fmt(DATA.costs_band[0], 4) + ", " + fmt(DATA.costs_band[1], 4) + "] only" : "")
  + " (scroll to zoom, drag to pan)", font: {size: 13}, x: 0.01, xanchor: "left"},
  xaxis: {range: W.a, title: {text: "a"}, zeroline: false}, yaxis: {range: W.b, title: {text: "b"}, zeroline: false},
  dragmode: "pan", hovermode: false, showlegend: true,
  legend: {font: {size: 10}, orientation: "h", x: 0, y: -0.12, yanchor: "top", bgcolor: "rgba(255,255,255,0.8)"}};

// -- the grids ----------------------------------------------------------------------------------
const gridTraces = [];
const seen = {f: {}, g: {}};
for (const id in contours) {
  const c = contours[id], xy = contourXY(c), g = c.grid, key = c.kind === "proper" ? "proper" : "half-lines";
  gridTraces.push({type: "scatter", mode: "lines", x: xy[0], y: xy[1], name: "grid " + g + " " + key,
    legendgroup: g + key, showlegend: !seen[g][key], hoverinfo: "text", text: id,
    line: {color: GRID_COLOURS[g], width: c.kind === "proper" ? 1.8 : 1.2, dash: c.kind === "proper" ? "solid" : "dash"}});
  seen[g][key] = true;
}
const HL = gridTraces.length, LINE = HL + 1, MEET = HL + 2;
gridTraces.push({type: "scatter", mode: "lines", x: [], y: [], name: "contours of the ties here",
  line: {color: "#111", width: 4}, opacity: 0.55, hoverinfo: "skip"});
gridTraces.push({type: "scatter", mode: "lines", x: [], y: [], name: "line r(a, b)", line: {color: "#c2185b", width: 2},
  hoverinfo: "skip"});
gridTraces.push({type: "scatter", mode: "markers", x: [], y: [],
  name: "where r(a, b) meets a contour", marker: {color: "#c2185b", size: 7}, hoverinfo: "skip"});
const gridLayout = {margin: {l: 55, r: 10, t: 30, b: 40}, title: {text: "extended Pareto grids and the line r(a, b)", font: {size: 13}, x: 0.01, xanchor: "left"},
  xaxis: {range: [X0, X1], title: {text: "f1 / g1"}, zeroline: false}, yaxis: {range: [Y0, Y1], title: {text: "f2 / g2"},
  zeroline: false}, dragmode: "pan", showlegend: true,
  legend: {font: {size: 10}, orientation: "h", x: 0, y: -0.12, yanchor: "top", bgcolor: "rgba(255,255,255,0.8)"}};

// -- geometry helpers ---------------------------------------------------------------------------
function lineParameter(c, a, b) {
  // s where r(a, b) = {s (a, 1 - a) + (b, -b)} meets contour c, or null (math.md sections 2 and 4)
  if (c.kind === "vertical") { const s = (c.start[0] - b) / a; return ((1 - a) * s - b >= c.start[1]) ? s : null; }
  if (c.kind === "horizontal") { const s = (c.start[1] + b) / (1 - a); return (a * s + b >= c.start[0]) ? s : null; }
  const P = c.points, G = p => (1 - a) * (p[0] - b) - a * (p[1] + b);
  for (let i = 0; i + 1 < P.length; i++) {
    const g0 = G(P[i]), g1 = G(P[i + 1]);
    if (g0 === 0) return (P[i][0] - b) / a;
    if (g0 * g1 < 0 || g1 === 0) { const t = g0 / (g0 - g1), x = P[i][0] + t * (P[i + 1][0] - P[i][0]); return (x - b) / a; }
  }
  return null;
}
function inRing(ring, a, b) {
  let inside = false;
  for (let i = 0, j = ring.length - 1; i < ring.length; j = i++) {
    const xi = ring[i][0], yi = ring[i][1], xj = ring[j][0], yj = ring[j][1];
    if (((yi > b) !== (yj > b)) && (a < (xj - xi) * (b - yi) / (yj - yi) + xi)) inside = !inside;
  }
  return inside;
}
// bucket grid over curve vertices, for the nearest tie curve
const NB = 64, bucket = new Map(), sa = W.a[1] - W.a[0], sb = W.b[1] - W.b[0];
const cellOf = (a, b) => [Math.floor((a - W.a[0]) / sa * NB), Math.floor((b - W.b[0]) / sb * NB)];
DATA.curves.forEach((c, ci) => c.xy.forEach(q => { const k = cellOf(q[0], q[1]).join(","); if (!bucket.has(k)) bucket.set(k, []);
  bucket.get(k).push(ci, q[0], q[1]); }));
function nearestCurve(a, b, radius) {
  const [i0, j0] = cellOf(a, b), r = Math.ceil(radius * NB) + 1;
  let best = null, bd = Infinity;
  for (let i = i0 - r; i <= i0 + r; i++) for (let j = j0 - r; j <= j0 + r; j++) {
    const arr = bucket.get(i + "," + j); if (!arr) continue;
    for (let k = 0; k < arr.length; k += 3) {
      const d = Math.hypot((arr[k + 1] - a) / sa, (arr[k + 2] - b) / sb);
      if (d < bd) { bd = d; best = arr[k]; }
    }
  }
  return bd <= radius ? {curve: best, distance: bd} : null;
}
function interpolate(S, H, a, b) {
  // bilinear interpolation of samples H[j][i] at (A[i], B[j])
  if (!S || !H) return null;
  const A = S.a, B = S.b;
  const find = (v, x) => { if (x < v[0] || x > v[v.length - 1]) return -1; let i = 0; while (i + 2 < v.length && v[i + 1] < x) i++; return i; };
  const i = find(A, a), j = find(B, b);
  if (i < 0 || j < 0) return null;
  const ta = A.length > 1 ? (a - A[i]) / (A[i + 1] - A[i]) : 0, tb = B.length > 1 ? (b - B[j]) / (B[j + 1] - B[j]) : 0;
  const v = [[H[j][i], H[j][i + 1]], [H[j + 1] ? H[j + 1][i] : null, H[j + 1] ? H[j + 1][i + 1] : null]];
  if (v.flat().some(x => x === null || x === undefined)) return null;
  return (1 - tb) * ((1 - ta) * v[0][0] + ta * v[0][1]) + tb * ((1 - ta) * v[1][0] + ta * v[1][1]);
}
function nearestSample(S, a, b) {
  // the sample node (A[i], B[j]) nearest to (a, b) in each coordinate, and h there (null outside the samples)
  if (!S || !S.h || !S.a.length || !S.b.length) return null;
  if (a < S.a[0] || a > S.a[S.a.length - 1] || b < S.b[0] || b > S.b[S.b.length - 1]) return null;
  const near = (v, x) => v.reduce((k, y, i) => Math.abs(y - x) < Math.abs(v[k] - x) ? i : k, 0);
  const i = near(S.a, a), j = near(S.b, b), h = S.h[j] ? S.h[j][i] : null;
  return (h === null || h === undefined) ? null : {a: S.a[i], b: S.b[j], h: h};
}
function tieValues(t, a, b) {
  // |c_P|, |c_Q| (push coordinates) and the residual |c_P| - k |c_Q| on the line r(a, b)
  const m = Math.min(a, 1 - a), s = t.pairs.flat().map(id => contours[id] ? lineParameter(contours[id], a, b) : null);
  if (s.some(x => x === null)) return null;
  const dp = m * Math.abs(s[0] - s[1]), dq = m * Math.abs(s[2] - s[3]), k = t.condition === "half" ? 2 : 1;
  return {dp: dp, dq: dq, residual: dp - k * dq};
}

// -- panels ----------------------------------------------------------------------------------
const $ = id => document.getElementById(id);
const plural = (n, one, many) => n + " " + (n === 1 ? one : (many || one + "s"));  // "1 tie", "3 ties"
const HOLDS = 1e-3;  // relative residual under which a patch's tie holds at the pointer (contours are thinned)
let elsewhere = 0;
function tiesHere(a, b) {
  const out = [];
  elsewhere = 0;
  DATA.patches.forEach(p => { if (!inRing(p.ring, a, b)) return;
    for (const i of p.ties) {
      const v = tieValues(comps[p.component].ties[i], a, b);
      if (v && Math.abs(v.residual) <= HOLDS * (v.dp + v.dq + 1e-12)) out.push({component: p.component, index: i, held: true});
      else elsewhere += 1;
    } });
  const near = nearestCurve(a, b, 0.012);
  if (near) { const c = DATA.curves[near.curve]; for (const i of c.ties) out.push({component: c.component, index: i, held: false, distance: near.distance}); }
  return out;
}
function update(a, b) {
  if (!(a > 0 && a < 1)) return;
  const gd = $("strip"), fl = gd._fullLayout, cross = $("cross");
  cross.style.left = (fl.xaxis._offset + fl.xaxis.l2p(a)) + "px";
  cross.style.top = (fl.yaxis._offset + fl.yaxis.l2p(b)) + "px";
  cross.style.display = "block";
  $("here-ab").textContent = "(a, b) = (" + fmt(a) + ", " + fmt(b) + ")";
  if (D && D.samples) {
    const h = interpolate(D.samples, D.samples.h, a, b);
    const per = Object.keys(D.samples.by_degree || {}).map(k => "h_" + k + " " + fmtMap(interpolate(D.samples, D.samples.by_degree[k], a, b))).join(", ");
    const near = nearestSample(D.samples, a, b);
    // interpolated h is printed to the dense error bound's digits, which can be none at all (knob:
    // bound 0.64 for D = 0.025, every value "0.0"); the nearest sample is a computed h, to the tolerance
    $("here-h").textContent = "h(a, b) = " + fmtMap(h) + " (interpolated; max over degrees" + (per ? "; " + per : "") + ")"
      + (near ? "; at the nearest sample (" + fmt(near.a, 3) + ", " + fmt(near.b, 3) + ") h = " + fmtH(near.h) : "");
  } else { $("here-h").textContent = D ? "h(a, b): distance.json has no distance-map samples (run specmap distance --method both)"
    : "h(a, b): no distance.json in this folder"; }
  const m = (1 - a) / a, c0 = -m * b - b;
  $("here-line").textContent = "line r(a, b): y = " + fmt(m, 3) + " x " + (c0 < 0 ? "- " : "+ ") + fmt(Math.abs(c0), 3);
  const ties = tiesHere(a, b), ids = new Set(), rows = [];
  for (const t of ties.slice(0, 12)) {
    const tie = comps[t.component].ties[t.index]; tie.pairs.flat().forEach(id => ids.add(id));
    const v = tieValues(tie, a, b);
    rows.push("<div class='tie" + (t.held ? " held" : "") + "'><span class='mono'>" + esc(tieText(tie)) + "</span> (" + esc(tie.family) + ", "
      + (t.held ? "holds on patch " + esc(t.component) : "tie curve of " + esc(t.component) + " at " + fmt(t.distance, 2) + " of the window")
      + (v ? "; |c_P| = " + fmt(v.dp) + ", |c_Q| = " + fmt(v.dq) + ", residual " + fmt(v.residual, 2) : "") + ")</div>");
  }
  $("here-ties").innerHTML = rows.length ? "<b>" + plural(ties.length, "tie") + " here</b>" + rows.join("") + (ties.length > 12 ? "<div class='muted'>and " + (ties.length - 12) + " more</div>" : "")
    : "<span class='muted'>no tie here (not in a patch, no tie curve within 1.2% of the window)</span>";
  if (elsewhere) $("here-ties").innerHTML += "<div class='muted'>" + plural(elsewhere, "more tie") + " of this patch " + (elsewhere === 1 ? "holds" : "hold") + " elsewhere on it</div>";
  const hx = [], hy = [];
  for (const id of ids) { const xy = contourXY(contours[id]); hx.push(...xy[0], null); hy.push(...xy[1], null); }
  const mx = [], my = [], mt = [], mm = Math.min(a, 1 - a);
  for (const id in contours) { const s = lineParameter(contours[id], a, b); if (s === null) continue;
    mx.push(a * s + b); my.push((1 - a) * s - b); mt.push(ids.has(id) ? id + " c=" + fmt(mm * s, 3) : ""); }
  const lab = declutter(mx, my, mt);
  Plotly.restyle("grids", {x: [hx, [X0, X1], mx], y: [hy, [m * (X0 - b) - b, m * (X1 - b) - b], my]}, [HL, LINE, MEET]);
  Plotly.relayout("grids", {annotations: lab.notes});
  if (lab.hidden.length) $("here-line").textContent += " (crowded, not labelled on the grids: " + lab.hidden.join("; ") + ")";
}
const MEASURE = document.createElement("canvas").getContext("2d");  // label widths in pixels
const SLOTS = [[1, -1], [1, 1], [-1, -1], [-1, 1]];  // right/left, above/below the point (pixel y grows down)
function declutter(xs, ys, texts) {
  // greedy label placement in pixels: each label takes the first corner around its point whose box
  // meets no label placed before (nor the plot edge); a label with no free corner is left out and named.
  // Labels are layout annotations (one per meet), anchored at the corner they take.
  const fl = $("grids")._fullLayout, xa = fl.xaxis, ya = fl.yaxis, H = 13, G = 3, placed = [];
  MEASURE.font = "10px " + (fl.font.family || "sans-serif");
  const notes = [], hidden = [];
  for (let i = 0; i < xs.length; i++) {
    if (!texts[i]) continue;
    const px = xa.l2p(xs[i]), py = ya.l2p(ys[i]), w = MEASURE.measureText(texts[i]).width + 4;
    let done = false;
    for (const [sx, sy] of SLOTS) {
      const x0 = sx > 0 ? px + G : px - G - w, y0 = sy > 0 ? py + G : py - G - H, box = [x0, y0, x0 + w, y0 + H];
      if (box[0] < 0 || box[2] > xa._length || box[1] < 0 || box[3] > ya._length) continue;
      if (placed.some(q => box[0] < q[2] && q[0] < box[2] && box[1] < q[3] && q[1] < box[3])) continue;
      placed.push(box);
      notes.push({x: xs[i], y: ys[i], text: texts[i], showarrow: false, font: {size: 10, color: "#c2185b"},
        xanchor: sx > 0 ? "left" : "right", yanchor: sy > 0 ? "top" : "bottom", xshift: sx * G, yshift: -sy * G});
      done = true; break;
    }
    if (!done) hidden.push(texts[i]);
  }
  return {notes: notes, hidden: hidden};
}
function select(a, b) {
  let cid = null;
  for (const p of DATA.patches) if (inRing(p.ring, a, b)) { cid = p.component; break; }
  if (cid === null) { const near = nearestCurve(a, b, 0.03); if (near) cid = DATA.curves[near.curve].component; }
  if (cid === null) { $("comp-ties").innerHTML = "<span class='muted'>no component at (" + fmt(a) + ", " + fmt(b) + ")</span>"; return; }
  const c = comps[cid], held = new Set(c.patch_ties);
  $("comp-ties").innerHTML = "<b>component " + esc(cid) + "</b> (" + esc(c.kind) + (c.kind === "patch" ? ", area " + fmt(c.area, 3) : "")
    + "): " + c.ties.length + " ties" + (held.size ? ", " + held.size + " hold identically on its patches (green)" : "")
    + (c.why ? "<div class='why'>why: " + esc(c.why) + "</div>" : "")
    + c.ties.map((t, i) => "<div class='tie mono" + (held.has(i) ? " held" : "") + "'>" + esc(tieText(t)) + "  <span class='muted'>" + esc(t.family) + "</span></div>").join("");
}
function toData(gd, ev) {
  const fl = gd._fullLayout, bb = gd.getBoundingClientRect(), xa = fl.xaxis, ya = fl.yaxis;
  const px = ev.clientX - bb.left - xa._offset, py = ev.clientY - bb.top - ya._offset;
  if (px < 0 || py < 0 || px > xa._length || py > ya._length) return null;
  return {a: xa.p2l(px), b: ya.p2l(py)};
}
function toClient(a, b) {
  const gd = $("strip"), fl = gd._fullLayout, bb = gd.getBoundingClientRect();
  return {x: bb.left + fl.xaxis._offset + fl.xaxis.l2p(a), y: bb.top + fl.yaxis._offset + fl.yaxis.l2p(b)};
}
// the report's words (report/pdf.py _drawn_words): special.json's tie curves, and how many are drawn
const drawnWords = (total, drawn) => (drawn && total && drawn !== total)
  ? plural(total, "tie curve") + " (" + drawn + " drawn, coincident ones merged)"
  : plural(total || drawn, "tie curve") + " drawn";
const REACHED = {"slope-one": "on the slope-one line a = 1/2", "special": "on the special set",
  "both": "on the slope-one line and on the special set alike", "dense": "by the dense sweep"};
const hl = D ? "D = " + D.text + " (tolerance " + fmt(D.tolerance, 3) + "), reached " + (REACHED[D.reached_on] || "on " + D.reached_on)
  + (D.at ? " at (a, b) = (" + fmt(D.at[0]) + ", " + fmt(D.at[1]) + ")" : "") : "no distance computed";
$("headline").textContent = hl + "; " + (DATA.special_missing ? DATA.special_missing + "."
  : plural(DATA.components.length, "component") + ", " + drawnWords(DATA.tie_curves, DATA.curves.length)
  + (DATA.labelled ? "" : " (unlabelled: the grid files are missing)") + ".")
  + (DATA.special_missing ? " Point at the strip to see the line and h there."
    : " Point at the strip to see the line and the ties there; click to list a component's ties.")
  + (DATA.costs_note ? " " + DATA.costs_note : "");
// -- slice diagrams on the lines computed when the page was written ---------------------------------
const LINES = (DATA.lines && DATA.lines.lines) || null;
let curLine = null, curDeg = null;
if (LINES) stripTraces.push({type: "scatter", mode: "markers", x: LINES.map(L => L.a), y: LINES.map(L => L.b),
  name: "lines with slice diagrams (click)", hoverinfo: "skip", marker: {symbol: "diamond-open", size: 12,
  color: "#c2185b", line: {width: 2}}});
function pt(p) { return "(" + fmt(p[0], 4) + ", " + (p[1] === null ? "inf" : fmt(p[1], 4)) + ")"; }
function showLine(i, k) {
  const L = LINES[i], degs = Object.keys(L.degrees);
  if (k === undefined || !(String(k) in L.degrees)) {
    k = degs.reduce((m, d) => ((L.degrees[d].h === null ? Infinity : L.degrees[d].h) > (L.degrees[m].h === null ? Infinity : L.degrees[m].h) ? d : m), degs[0]);
  }
  k = String(k); curLine = i; curDeg = k;
  const P = L.degrees[k];
  const vals = [];
  for (const q of P.f.concat(P.g)) { vals.push(q[0]); if (q[1] !== null) vals.push(q[1]); }
  let lo = vals.length ? Math.min(...vals) : 0, hi = vals.length ? Math.max(...vals) : 1;
  const sp = Math.max(hi - lo, 1e-9); lo -= 0.08 * sp; hi += 0.08 * sp;
  const top = hi + 0.1 * sp, Y = q => q[1] === null ? top : q[1];
  const seg = (ps, x, y) => { for (const pr of ps) {
      const a = pr[0] === null ? null : P.f[pr[0]], b = pr[1] === null ? null : P.g[pr[1]];
      if (a && b) { x.push(a[0], b[0], null); y.push(Y(a), Y(b), null); }
      else { const q = a || b; if (!q || q[1] === null) continue; const m = (q[0] + q[1]) / 2; x.push(q[0], m, null); y.push(q[1], m, null); }
    } };
  const mx = [], my = [], wx = [], wy = [];
  seg(P.pairs, mx, my);
  if (P.worst !== null) seg([P.pairs[P.worst]], wx, wy);
  const traces = [
    {x: [lo, top], y: [lo, top], mode: "lines", line: {color: "#999", width: 1}, name: "diagonal", hoverinfo: "skip"},
    {x: [lo, hi], y: [top, top], mode: "lines", line: {color: "#999", width: 1, dash: "dot"}, name: "death = inf", hoverinfo: "skip"},
    {x: mx, y: my, mode: "lines", line: {color: "#777", width: 1.2}, name: "matching", hoverinfo: "skip"},
    {x: wx, y: wy, mode: "lines", line: {color: "#c2185b", width: 3}, name: "costliest pair (= h)", hoverinfo: "skip"},
    {x: P.f.map(q => q[0]), y: P.f.map(Y), mode: "markers", marker: {color: GRID_COLOURS.f, size: 8}, name: "f",
     text: P.f.map(pt), hoverinfo: "text"},
    {x: P.g.map(q => q[0]), y: P.g.map(Y), mode: "markers", marker: {color: GRID_COLOURS.g, size: 8, symbol: "square-open", line: {width: 2}},
     name: "g", text: P.g.map(pt), hoverinfo: "text"}];
  const layout = {margin: {l: 45, r: 8, t: 26, b: 36}, showlegend: true, legend: {font: {size: 10}, x: 1, xanchor: "right", y: 0, yanchor: "bottom", bgcolor: "rgba(255,255,255,0.85)"},
    title: {text: "degree " + k + " on r(" + fmt(L.a, 4) + ", " + fmt(L.b, 4) + ")", font: {size: 12}, x: 0.01, xanchor: "left"},
    xaxis: {title: {text: "birth"}, range: [lo, top + 0.04 * sp], zeroline: false}, yaxis: {title: {text: "death"}, range: [lo, top + 0.06 * sp], zeroline: false},
    annotations: [{x: lo, y: top, text: "inf", showarrow: false, xanchor: "left", yanchor: "bottom", font: {size: 10, color: "#666"}}]};
  Plotly.react("diagram", traces, layout, {displaylogo: false, displayModeBar: false});
  const rec = L.recorded && L.recorded[k] !== undefined ? "; distance.json: D_" + k + " = " + ((D && D.by_degree[k]) ? D.by_degree[k].text : fmtH(L.recorded[k])) : "";
  let worst = "";
  if (P.worst !== null) { const pr = P.pairs[P.worst];
    worst = "costliest pair: " + (pr[0] === null ? "diagonal" : "f " + pt(P.f[pr[0]])) + " - " + (pr[1] === null ? "diagonal" : "g " + pt(P.g[pr[1]]))
      + ", cost " + (pr[2] === null ? "inf" : fmtH(pr[2])); }
  $("diagram-info").innerHTML = "<b>" + esc(L.label) + "</b>: h_" + k + " = " + (P.h === null ? "inf" : fmtH(P.h)) + esc(rec)
    + "<br>" + plural(P.f.length, "point") + " of f, " + P.g.length + " of g; " + esc(worst);
  for (const b of document.querySelectorAll("#line-buttons button")) b.classList.toggle("on", Number(b.dataset.i) === i);
  $("degree-buttons").innerHTML = degs.map(d => "<button data-k='" + d + "'" + (d === k ? " class='on'" : "") + ">H_" + d + ": h = "
    + (L.degrees[d].h === null ? "inf" : fmtH(L.degrees[d].h)) + "</button>").join("");
  for (const b of document.querySelectorAll("#degree-buttons button")) b.onclick = () => showLine(curLine, b.dataset.k);
  update(L.a, L.b);
  $("here-h").textContent += "; computed on this line: " + degs.map(d => "h_" + d + " " + (L.degrees[d].h === null ? "inf" : fmtH(L.degrees[d].h))).join(", ");
}
function nearLine(a, b) {
  if (!LINES) return null;
  let best = null, bd = 0.02;
  LINES.forEach((L, i) => { const d = Math.hypot((L.a - a) / sa, (L.b - b) / sb); if (d < bd) { bd = d; best = i; } });
  return best;
}
if (LINES) {
  $("line-buttons").innerHTML = "Lines: " + LINES.map((L, i) => "<button data-i='" + i + "'>" + esc(L.label) + "</button>").join("");
  for (const b of document.querySelectorAll("#line-buttons button")) b.onclick = () => showLine(Number(b.dataset.i));
  $("notes").textContent = "Computed from the meshes of f and g when this page was written, on the lines distance.json names "
    + "(diamonds on the strip); the matching is optimal for the bottleneck distance, points at infinity drawn on the dotted row. "
    + "h(a, b) at the pointer is interpolated from the dense sweep's samples.";
} else {
  $("diagram").style.display = "none";
  $("notes").textContent = "No slice diagrams in this page: " + ((DATA.lines && DATA.lines.why_not) || "not computed") + "."
    + (D && D.samples ? " h(a, b) at the pointer is interpolated from the dense sweep's samples in distance.json." : "");
}
const config = {scrollZoom: true, displaylogo: false, responsive: true, displayModeBar: "hover"};
Promise.all([Plotly.newPlot("strip", stripTraces, stripLayout, config), Plotly.newPlot("grids", gridTraces, gridLayout, config)])
  .then(() => {
    const cross = document.createElement("div"); cross.id = "cross"; $("strip").appendChild(cross);
    let pending = null;
    $("strip").addEventListener("mousemove", ev => { const p = toData($("strip"), ev); if (!p) return;
      if (pending) cancelAnimationFrame(pending); pending = requestAnimationFrame(() => update(p.a, p.b)); });
    $("strip").addEventListener("click", ev => { const p = toData($("strip"), ev); if (!p) return;
      select(p.a, p.b); const i = nearLine(p.a, p.b); if (i !== null) showLine(i); });
    window.explorer = {update: update, select: select, toClient: toClient, showLine: showLine};
    if (LINES) showLine(0);
    window.explorerReady = true;
  });
</script>
</body>
</html>
"""
"""The page; ``__TITLE__``, ``__PLOTLY__`` and ``__DATA__`` are filled in by :func:`specmap.explore.build_explorer`."""
