// SVG drawing of the main chart (data, estimate, band, predictions) and of the selector-score chart.

import {
  extent, pad, linearScale, logScale, linearTicks, logTicks, timeTicks,
  formatTick, formatDateTick, formatNumber,
} from "./scales.js";

const NS = "http://www.w3.org/2000/svg";

function el(tag, attrs, parent) {
  const node = document.createElementNS(NS, tag);
  for (const [k, v] of Object.entries(attrs || {})) {
    if (v !== null && v !== undefined) node.setAttribute(k, String(v));
  }
  if (parent) parent.appendChild(node);
  return node;
}

function clear(svg) {
  for (const child of [...svg.childNodes]) {
    if (child.nodeName !== "title") svg.removeChild(child);
  }
}

const r2 = (v) => Math.round(v * 100) / 100;
const ok = (v) => v !== null && v !== undefined && Number.isFinite(v);

/** Polyline through (xs[i], ys[i]) broken wherever a value is missing. */
function linePath(xs, ys, sx, sy) {
  let d = "";
  let pen = false;
  for (let i = 0; i < xs.length; i++) {
    if (!ok(xs[i]) || !ok(ys[i])) {
      pen = false;
      continue;
    }
    d += `${pen ? "L" : "M"}${r2(sx(xs[i]))} ${r2(sy(ys[i]))}`;
    pen = true;
  }
  return d;
}

/** Closed areas between lower and upper, one per run of defined values. */
function areaPath(xs, lower, upper, sx, sy) {
  let d = "";
  let run = [];
  const flush = () => {
    if (run.length > 0) {
      const top = run.map((i, k) => `${k ? "L" : "M"}${r2(sx(xs[i]))} ${r2(sy(upper[i]))}`).join("");
      const bottom = run.slice().reverse().map((i) => `L${r2(sx(xs[i]))} ${r2(sy(lower[i]))}`).join("");
      d += `${top}${bottom}Z`;
    }
    run = [];
  };
  for (let i = 0; i < xs.length; i++) {
    if (ok(xs[i]) && ok(lower[i]) && ok(upper[i])) run.push(i);
    else flush();
  }
  flush();
  return d;
}

function axisLabel(label, unit) {
  if (!label && !unit) return "";
  return unit ? `${label || ""} (${unit})`.trim() : label;
}

function drawXAxis(g, sx, box, { xIsTime, label, logTicksOn }) {
  let ticks;
  let fmt;
  if (logTicksOn) {
    ticks = logTicks(sx.domain);
    fmt = (v) => formatNumber(v, 2);
  } else if (xIsTime) {
    const t = timeTicks(sx.domain, 7);
    ticks = t.ticks;
    fmt = (v) => formatDateTick(v, t.step);
  } else {
    const t = linearTicks(sx.domain, 8);
    ticks = t.ticks;
    fmt = (v) => formatTick(v, t.step);
  }
  const axis = el("g", { class: "axis axis-x" }, g);
  el("line", { x1: box.left, x2: box.right, y1: box.bottom, y2: box.bottom, class: "axis-line" }, axis);
  for (const v of ticks) {
    const x = r2(sx(v));
    el("line", { x1: x, x2: x, y1: box.top, y2: box.bottom, class: "grid" }, axis);
    el("line", { x1: x, x2: x, y1: box.bottom, y2: box.bottom + 5, class: "tick" }, axis);
    el("text", { x, y: box.bottom + 18, "text-anchor": "middle", class: "tick-label" }, axis).textContent = fmt(v);
  }
  el("text", { x: (box.left + box.right) / 2, y: box.bottom + 38, "text-anchor": "middle", class: "axis-title", id: null }, axis)
    .textContent = label;
  return axis;
}

function drawYAxis(g, sy, box, label) {
  const t = linearTicks(sy.domain, 6);
  const axis = el("g", { class: "axis axis-y" }, g);
  el("line", { x1: box.left, x2: box.left, y1: box.top, y2: box.bottom, class: "axis-line" }, axis);
  for (const v of t.ticks) {
    const y = r2(sy(v));
    el("line", { x1: box.left, x2: box.right, y1: y, y2: y, class: "grid" }, axis);
    el("line", { x1: box.left - 5, x2: box.left, y1: y, y2: y, class: "tick" }, axis);
    el("text", { x: box.left - 8, y: y + 4, "text-anchor": "end", class: "tick-label" }, axis).textContent = formatTick(v, t.step);
  }
  const cy = (box.top + box.bottom) / 2;
  el("text", { x: 16, y: cy, transform: `rotate(-90 16 ${cy})`, "text-anchor": "middle", class: "axis-title" }, axis)
    .textContent = label;
  return axis;
}

function plotBox(svg, margin) {
  const [, , w, h] = svg.getAttribute("viewBox").split(/\s+/).map(Number);
  return { left: margin.left, right: w - margin.right, top: margin.top, bottom: h - margin.bottom, width: w, height: h };
}

/** y range from the data and estimate, widened for bands and intervals but by at most half the span. */
function yDomain(data, curve, predictions) {
  const inside = predictions.filter((p) => !p.extrapolated);
  const base = extent(data.y, curve.estimate, inside.map((p) => p.estimate)) || [0, 1];
  const wide = extent(
    base, curve.lower, curve.upper,
    predictions.map((p) => p.estimate),
    predictions.map((p) => p.interval_lower), predictions.map((p) => p.interval_upper),
    predictions.map((p) => p.lower), predictions.map((p) => p.upper),
  ) || base;
  const span = base[1] - base[0] || 1;
  const lo = Math.max(wide[0], base[0] - span / 2);
  const hi = Math.min(wide[1], base[1] + span / 2);
  return { domain: pad([lo, hi], 0.04), clipped: lo > wide[0] || hi < wide[1] };
}

function drawPrediction(g, p, sx, sy) {
  const extra = Boolean(p.extrapolated);
  const node = el("g", {
    class: extra ? "prediction extrapolated" : "prediction",
    "data-x": p.x, "data-extrapolated": String(extra),
  }, g);
  if (!ok(p.estimate)) return node;
  const x = r2(sx(p.x));
  const y = r2(sy(p.estimate));
  if (ok(p.interval_lower) && ok(p.interval_upper)) {
    const y0 = r2(sy(p.interval_lower));
    const y1 = r2(sy(p.interval_upper));
    el("line", { x1: x, x2: x, y1: y0, y2: y1, class: "pred-interval" }, node);
    el("line", { x1: x - 6, x2: x + 6, y1: y0, y2: y0, class: "pred-interval" }, node);
    el("line", { x1: x - 6, x2: x + 6, y1: y1, y2: y1, class: "pred-interval" }, node);
  }
  if (ok(p.lower) && ok(p.upper)) {
    el("line", { x1: x, x2: x, y1: r2(sy(p.lower)), y2: r2(sy(p.upper)), class: "pred-ci" }, node);
  }
  el("path", {
    d: `M${x} ${y - 7}L${x + 7} ${y}L${x} ${y + 7}L${x - 7} ${y}Z`,
    class: extra ? "pt-pred-extra" : "pt-pred",
  }, node);
  return node;
}

/**
 * Draw data, estimate, band and predictions into `svg`.
 * @returns {{clipped: boolean, yDomain: number[], xDomain: number[]}}
 */
export function drawMainChart(svg, { data, curve, predictions, anomalies, meta }) {
  clear(svg);
  const box = plotBox(svg, { left: 74, right: 18, top: 14, bottom: 52 });
  predictions = predictions || [];
  const xd = pad(extent(data.x, curve.x, predictions.map((p) => p.x)) || [0, 1], 0.02);
  const { domain: yd, clipped } = yDomain(data, curve, predictions);
  const sx = linearScale(xd, [box.left, box.right]);
  const sy = linearScale(yd, [box.bottom, box.top]);

  const root = el("g", {}, svg);
  drawYAxis(root, sy, box, axisLabel(meta.yLabel, meta.yUnit));
  drawXAxis(root, sx, box, { xIsTime: meta.xIsTime, label: axisLabel(meta.xLabel, meta.xIsTime ? "UTC" : meta.xUnit) });

  const clipId = `${svg.id}-clip`;
  const defs = el("defs", {}, root);
  const clip = el("clipPath", { id: clipId }, defs);
  el("rect", { x: box.left, y: box.top, width: box.right - box.left, height: box.bottom - box.top }, clip);
  const plot = el("g", { "clip-path": `url(#${clipId})` }, root);

  // Shade x beyond the data range, where any estimate is an extrapolation.
  const dataRange = extent(data.x);
  if (dataRange) {
    const zones = [[box.left, sx(dataRange[0])], [sx(dataRange[1]), box.right]];
    for (const [x0, x1] of zones) {
      if (x1 - x0 < 1) continue;
      el("rect", { x: r2(x0), y: box.top, width: r2(x1 - x0), height: box.bottom - box.top, class: "zone-extra" }, plot);
      if (x1 - x0 > 70) {
        el("text", { x: r2((x0 + x1) / 2), y: box.bottom - 6, "text-anchor": "middle", class: "zone-label" }, plot)
          .textContent = "beyond the data";
      }
    }
  }

  if (curve.lower && curve.upper) {
    el("path", { id: "band-path", class: "area-band", d: areaPath(curve.x, curve.lower, curve.upper, sx, sy) }, plot);
  }
  let pts = "";
  for (let i = 0; i < data.x.length; i++) pts += `M${r2(sx(data.x[i]))} ${r2(sy(data.y[i]))}h0`;
  // Fewer points are drawn larger and darker; thousands are drawn small and translucent.
  const n = data.x.length;
  const [size, opacity] = n <= 200 ? [6, 0.85] : n <= 3000 ? [4, 0.55] : [3, 0.35];
  el("path", {
    id: "data-points", class: "pt-data-path", d: pts, "data-count": n,
    "stroke-width": size, "stroke-opacity": opacity,
  }, plot);
  el("path", { id: "estimate-path", class: "ln-estimate", d: linePath(curve.x, curve.estimate, sx, sy) }, plot);
  const ag = el("g", { id: "anomalies", "data-count": (anomalies || []).length }, plot);
  for (const a of anomalies || []) {
    if (ok(a.x) && ok(a.y)) el("circle", { cx: r2(sx(a.x)), cy: r2(sy(a.y)), r: 6, class: "pt-anomaly" }, ag);
  }
  const pg = el("g", { id: "predictions" }, plot);
  for (const p of predictions) drawPrediction(pg, p, sx, sy);
  // Labels and off-scale arrows sit outside the clipped area so they are never cut off.
  for (const p of predictions) {
    if (!ok(p.estimate)) continue;
    const x = sx(p.x);
    const yp = sy(p.estimate);
    const off = yp < box.top ? "above" : yp > box.bottom ? "below" : null;
    if (off) {
      const ye = off === "above" ? box.top : box.bottom;
      const dy = off === "above" ? 9 : -9;
      el("path", {
        d: `M${r2(x)} ${ye}L${r2(x + 6)} ${ye + dy}L${r2(x - 6)} ${ye + dy}Z`,
        class: p.extrapolated ? "pt-pred-extra off-scale" : "pt-pred off-scale",
      }, root);
    }
    if (!p.extrapolated && !off) continue;
    const y = off === "above" ? box.top + 22 : off === "below" ? box.bottom - 14 : Math.max(box.top + 10, yp - 12);
    const anchor = x > box.right - 60 ? "end" : x < box.left + 60 ? "start" : "middle";
    const label = `${p.extrapolated ? "extrapolated" : "prediction"}${off ? `: ${formatNumber(p.estimate, 3)}, off scale` : ""}`;
    el("text", { x: r2(anchor === "end" ? x + 6 : anchor === "start" ? x - 6 : x), y: r2(y), "text-anchor": anchor, class: "pred-label" }, root)
      .textContent = label;
  }
  if (clipped) {
    el("text", { x: box.right - 4, y: box.top + 14, "text-anchor": "end", class: "note" }, root)
      .textContent = "band or intervals reach beyond the plotted range";
  }
  return { clipped, yDomain: yd, xDomain: xd };
}

/** Draw the selector score for each candidate bandwidth, with the chosen one marked. */
export function drawScoreChart(svg, bandwidth, { unitLabel, selectorName, formatBandwidth, ticks }) {
  clear(svg);
  const box = plotBox(svg, { left: 74, right: 18, top: 14, bottom: 48 });
  const cands = bandwidth && bandwidth.candidates;
  const scores = bandwidth && bandwidth.scores;
  const pairs = [];
  if (cands && scores) {
    for (let i = 0; i < cands.length; i++) {
      if (ok(cands[i]) && cands[i] > 0 && ok(scores[i])) pairs.push([cands[i], scores[i]]);
    }
  }
  if (pairs.length < 2) {
    el("text", { x: box.width / 2, y: box.height / 2, "text-anchor": "middle", class: "placeholder", id: "score-placeholder" }, svg)
      .textContent = bandwidth && bandwidth.selector
        ? "This selector reports no score per candidate."
        : "Choose an automatic bandwidth to see the selector's score for each candidate.";
    return null;
  }
  const chosen = bandwidth.value;
  const xd = extent(pairs.map((p) => p[0]), [chosen]);
  const sx = logScale([xd[0] / 1.08, xd[1] * 1.08], [box.left, box.right]);
  const sy = linearScale(pad(extent(pairs.map((p) => p[1])), 0.08), [box.bottom, box.top]);
  const root = el("g", {}, svg);
  drawYAxis(root, sy, box, `${selectorName} score`);
  const xAxis = drawXAxis(root, sx, box, { logTicksOn: true, label: `bandwidth (${unitLabel}, log scale)` });
  if (formatBandwidth) {
    for (const t of xAxis.querySelectorAll(".tick-label")) t.remove();
    for (const v of (ticks ? ticks(sx.domain) : logTicks(sx.domain))) {
      el("text", { x: r2(sx(v)), y: box.bottom + 18, "text-anchor": "middle", class: "tick-label" }, xAxis)
        .textContent = formatBandwidth(v);
    }
  }
  el("path", {
    id: "score-path", class: "ln-score",
    d: pairs.map(([c, s], i) => `${i ? "L" : "M"}${r2(sx(c))} ${r2(sy(s))}`).join(""),
  }, root);
  let pts = "";
  for (const [c, s] of pairs) pts += `M${r2(sx(c))} ${r2(sy(s))}h0`;
  el("path", { class: "pt-score", d: pts }, root);
  if (ok(chosen) && chosen > 0) {
    const x = r2(sx(chosen));
    el("line", { id: "score-chosen", x1: x, x2: x, y1: box.top, y2: box.bottom, class: "ln-chosen", "data-value": chosen }, root);
    const near = pairs.reduce((a, b) => (Math.abs(Math.log(b[0] / chosen)) < Math.abs(Math.log(a[0] / chosen)) ? b : a));
    const y = r2(sy(near[1]));
    el("path", { d: `M${x} ${y - 7}L${x + 7} ${y}L${x} ${y + 7}L${x - 7} ${y}Z`, class: "pt-chosen" }, root);
    const right = x > (box.left + box.right) / 2;
    el("text", { x: right ? x - 8 : x + 8, y: box.top + 14, "text-anchor": right ? "end" : "start", class: "chosen-label" }, root)
      .textContent = `chosen h = ${formatBandwidth ? formatBandwidth(chosen) : formatNumber(chosen, 3)}`;
  }
  return { pairs, chosen };
}
