// Bandwise demo page: reads the controls, refits through POST /v1/smooth and shows the answer.
// Nothing here computes a smoother; every number on the page comes from the service.

import { parseData, parsePoints } from "./parse.js";
import { drawMainChart, drawScoreChart } from "./chart.js";
import { extent, formatNumber, formatDate, formatDuration, formatIsoInput, durationTicks } from "./scales.js";
import { curlCommand, pythonSnippet } from "./snippets.js";

const $ = (id) => document.getElementById(id);
const DEBOUNCE_MS = 250;
const SLIDER_MAX = 1000;
const CURVE_POINTS = 200;

const state = {
  data: null,
  pasted: null,
  hRange: [0.1, 10],
  seq: 0,
  controller: null,
  timer: null,
};

// ---------------------------------------------------------------- data

function looksLikeEpochMs(unit, xs) {
  if (unit && /epoch|since 1970|unix/i.test(unit)) return true;
  const r = extent(xs);
  return Boolean(unit && /^ms$/i.test(unit.trim()) && r && r[0] > 1e11 && r[1] < 1e13);
}

/** Accept the demo endpoint's record in either flat (x_label, x_unit) or nested (labels, units) form. */
function normaliseDemo(name, doc) {
  const labels = doc.labels || {};
  const units = doc.units || {};
  const xUnit = doc.x_unit ?? units.x ?? "";
  return {
    name,
    x: doc.x,
    y: doc.y,
    title: doc.title || name,
    description: doc.description || "",
    xLabel: doc.x_label ?? labels.x ?? "x",
    yLabel: doc.y_label ?? labels.y ?? "y",
    xUnit,
    yUnit: doc.y_unit ?? units.y ?? "",
    xIsTime: Boolean(doc.x_is_time ?? (doc.x_kind === "time" || looksLikeEpochMs(xUnit, doc.x))),
  };
}

/** API URLs relative to the page, so the page also works behind a gateway that adds a path prefix. */
function apiUrl(path) {
  return new URL(path, document.baseURI).href;
}

/** Base URL of the service as a client would use it (no trailing slash). */
function serviceBase() {
  return new URL(".", document.baseURI).href.replace(/\/$/, "");
}

function authHeaders() {
  const key = $("api-key").value.trim();
  return key ? { Authorization: `Bearer ${key}` } : {};
}

async function fetchJson(url, options = {}) {
  const response = await fetch(url, { ...options, headers: { ...(options.headers || {}), ...authHeaders() } });
  if (response.status === 401) {
    $("key-box").open = true;
  }
  const text = await response.text();
  let body = null;
  try {
    body = text ? JSON.parse(text) : null;
  } catch {
    body = { detail: text };
  }
  return { response, body };
}

async function loadDemoList() {
  try {
    const { response, body } = await fetchJson(apiUrl("v1/demo"));
    if (!response.ok) return;
    const items = Array.isArray(body) ? body : body.demos || body.datasets || body.items || [];
    const select = $("dataset");
    for (const item of items) {
      const name = typeof item === "string" ? item : item.name;
      const title = typeof item === "string" ? item : item.title || item.name;
      // Built-in options keep their short labels; the full title heads the chart.
      if (![...select.options].some((o) => o.value === name)) {
        select.insertBefore(new Option(title, name), select.querySelector('option[value="pasted"]'));
      }
    }
  } catch {
    // the built-in list of demos stays
  }
}

async function loadDemo(name) {
  setStatus(`Loading ${name}…`);
  const { response, body } = await fetchJson(apiUrl(`v1/demo/${encodeURIComponent(name)}`));
  if (!response.ok) throw problemError(response, body);
  return normaliseDemo(name, body);
}

/** Forget any fit in flight: its answer belongs to settings that no longer hold. */
function invalidate() {
  state.seq += 1;
  if (state.controller) state.controller.abort();
  state.controller = null;
}

function setData(data) {
  invalidate();
  state.data = data;
  $("dataset-description").textContent = data.description || "";
  $("chart-heading").textContent = data.title ? `Estimate: ${data.title}` : "Estimate";
  const r = extent(data.x) || [0, 1];
  const span = r[1] - r[0] || 1;
  state.hRange = [span / 400, span];
  $("predict-at").value = defaultPredictions(r, data.xIsTime);
  $("predict-hint").textContent = data.xIsTime
    ? "Dates as 2024-05-01T12:00 (UTC) or epoch milliseconds. Points outside the data range are extrapolated and drawn hollow."
    : "Points outside the data range are extrapolated and drawn hollow.";
  $("bw-min").value = "";
  $("bw-max").value = "";
  $("bw-range-hint").textContent = data.xIsTime
    ? "Smallest and largest candidate bandwidth, in milliseconds (1 hour = 3600000). Widen the range when the choice sits at its edge."
    : "Smallest and largest candidate bandwidth, in x units. Widen the range when the choice sits at its edge.";
  setBandwidthControls(span / 20);
}

/** Three points: two inside the data range and one beyond it, to show extrapolation. */
function defaultPredictions([lo, hi], xIsTime) {
  const span = hi - lo;
  const round = (v) => (xIsTime ? Math.round(v / 3600e3) * 3600e3 : Number(formatNumber(v, 2).replace("\u2212", "-")));
  const pts = [lo + 0.3 * span, lo + 0.7 * span, hi + 0.05 * span].map(round);
  return pts.map((v) => (xIsTime ? formatIsoInput(v) : String(v))).join(", ");
}

// ---------------------------------------------------------------- bandwidth slider (log scale)

function sliderToH(t) {
  const [lo, hi] = state.hRange;
  return Math.exp(Math.log(lo) + (t / SLIDER_MAX) * (Math.log(hi) - Math.log(lo)));
}

function hToSlider(h) {
  const [lo, hi] = state.hRange;
  const t = ((Math.log(h) - Math.log(lo)) / (Math.log(hi) - Math.log(lo))) * SLIDER_MAX;
  return Math.round(Math.min(SLIDER_MAX, Math.max(0, t)));
}

function formatBandwidth(h) {
  if (!Number.isFinite(h)) return "—";
  if (state.data && state.data.xIsTime) return formatDuration(h);
  const unit = state.data && state.data.xUnit ? ` ${state.data.xUnit}` : "";
  return `${formatNumber(h, 3)}${unit}`;
}

function setBandwidthControls(h) {
  if (h < state.hRange[0]) state.hRange[0] = h / 1.5;
  if (h > state.hRange[1]) state.hRange[1] = h * 1.5;
  const slider = $("bw-slider");
  slider.value = String(hToSlider(h));
  slider.setAttribute("aria-valuetext", `h = ${formatBandwidth(h)}`);
  $("bw-value").value = String(Number(h.toPrecision(4)));
}

function currentMode() {
  return $("bw-auto").checked ? "auto" : "manual";
}

function setMode(mode) {
  $("bw-auto").checked = mode === "auto";
  $("bw-manual").checked = mode !== "auto";
  $("auto-options").disabled = mode !== "auto";
}

// ---------------------------------------------------------------- request

function buildRequest() {
  const d = state.data;
  const request = {
    x: d.x,
    y: d.y,
    kernel: $("kernel").value,
    degree: Number($("degree").value),
    noise: $("noise").value,
  };
  if (currentMode() === "auto") {
    request.bandwidth = "auto";
    request.selector = $("selector").value;
    request.rule = $("rule").value;
    const lo = Number($("bw-min").value);
    const hi = Number($("bw-max").value);
    if ($("bw-min").value !== "" && lo > 0) request.bandwidth_min = lo;
    if ($("bw-max").value !== "" && hi > 0) request.bandwidth_max = hi;
  } else {
    request.bandwidth = Number($("bw-value").value);
  }
  if ($("counts").checked) {
    // counts are fitted by local likelihood with the gaussian kernel, degree 0 or 1
    request.family = "poisson";
    request.kernel = "gaussian";
    request.degree = Math.min(request.degree, 1);
  }
  if ($("robust").checked) request.robust = true;
  if ($("anomalies").checked) request.anomalies = { level: 0.999 };
  request.curve = { points: CURVE_POINTS };
  const method = $("band-method").value;
  if (method !== "none") {
    request.bands = { method, level: Number($("band-level").value), simultaneous: $("band-simultaneous").checked };
    if (request.family === "poisson") {
      request.bands = { method: "analytic", level: request.bands.level };  // counts: analytic pointwise bands
    } else if (method !== "analytic") {
      request.bands.replicates = Number($("band-replicates").value);
      request.bands.seed = 0;
    }
  }
  const points = parsePoints($("predict-at").value, d.xIsTime);
  if (points.length) request.predict_at = points;
  return request;
}

function problemError(response, body) {
  const err = new Error((body && (body.detail || body.title)) || `HTTP ${response.status}`);
  err.problem = body || {};
  err.status = response.status;
  return err;
}

/** Marks the page busy while a refit is pending, so scripts (and tests) can wait for it to settle. */
function setBusy(busy) {
  document.body.dataset.busy = busy ? "1" : "0";
}

function scheduleRefit() {
  clearTimeout(state.timer);
  setBusy(true);
  state.timer = setTimeout(refit, DEBOUNCE_MS);
}

async function refit() {
  state.timer = null;
  const seq = ++state.seq;
  try {
    await refitOnce(seq);
  } finally {
    if (seq === state.seq && state.timer === null) setBusy(false);
  }
}

async function refitOnce(seq) {
  const data = state.data;
  if (!data) return;
  let request;
  try {
    request = buildRequest();
    $("predict-error").hidden = true;
  } catch (err) {
    showInline("predict-error", err.message);
    return;
  }
  if (request.bandwidth !== "auto" && !(request.bandwidth > 0)) {
    showProblem({ title: "Bandwidth must be a positive number", detail: "Type a value above zero or use the slider." });
    return;
  }
  if (state.controller) state.controller.abort();
  const controller = new AbortController();
  state.controller = controller;
  setStatus("Fitting…");
  const started = performance.now();
  try {
    const { response, body } = await fetchJson(apiUrl("v1/smooth"), {
      method: "POST",
      headers: { "Content-Type": "application/json", Accept: "application/json" },
      body: JSON.stringify(request),
      signal: controller.signal,
    });
    if (seq !== state.seq) return;
    if (!response.ok) throw problemError(response, body);
    const elapsed = performance.now() - started;
    render(data, request, body);
    $("main-chart").dataset.render = String(seq);
    setStatus(`Fitted ${data.x.length.toLocaleString("en")} points in ${Math.round(elapsed)} ms.`);
    $("problem").hidden = true;
  } catch (err) {
    if (err.name === "AbortError" || seq !== state.seq) return;
    setStatus("The last request failed; the chart shows the previous fit.");
    showProblem(err.problem || { title: "Request failed", detail: err.message });
  }
}

// ---------------------------------------------------------------- rendering

function setStatus(text) {
  $("status").textContent = text;
}

function showInline(id, text) {
  const node = $(id);
  node.textContent = text;
  node.hidden = false;
}

function showProblem(problem) {
  const node = $("problem");
  node.replaceChildren();
  const strong = document.createElement("strong");
  strong.textContent = problem.title || "Error";
  node.append(strong);
  if (problem.detail) node.append(` — ${problem.detail}`);
  const fields = problem.errors || problem.fields || problem["invalid-params"] || problem.invalid_params;
  if (Array.isArray(fields) && fields.length) {
    const list = document.createElement("ul");
    for (const f of fields) {
      const li = document.createElement("li");
      const where = f.field || f.name || (Array.isArray(f.loc) ? f.loc.join(".") : f.pointer) || "";
      li.textContent = `${where}${where ? ": " : ""}${f.message || f.reason || f.msg || JSON.stringify(f)}`;
      list.append(li);
    }
    node.append(list);
  }
  node.hidden = false;
}

function formatX(v) {
  if (state.data.xIsTime) return formatDate(v);
  const unit = state.data.xUnit ? ` ${state.data.xUnit}` : "";
  return `${formatNumber(v, 3)}${unit}`;
}

function formatY(v) {
  const unit = state.data.yUnit ? ` ${state.data.yUnit}` : "";
  return `${formatNumber(v, 3)}${unit}`;
}

const SELECTOR_NAMES = { gcv: "GCV", loocv: "LOOCV", aicc: "AICc", plugin: "plug-in", rule_of_thumb: "rule-of-thumb", modified_cv: "modified CV" };
const DEGREE_NAMES = ["Local constant (Nadaraya–Watson, degree 0)", "Local linear (degree 1)", "Local quadratic (degree 2)"];
const BAND_NAMES = { analytic: "analytic", wild_bootstrap: "wild bootstrap", residual_bootstrap: "residual bootstrap" };

function render(d, request, response) {
  const curve = response.curve || { x: [], estimate: [] };
  const predictions = response.predictions || [];
  const chart = drawMainChart($("main-chart"), {
    data: d,
    curve,
    predictions,
    anomalies: (response.anomalies || []).map((a) => ({ x: typeof a.x === "string" ? Date.parse(a.x) : a.x, y: a.y })),
    meta: { xLabel: d.xLabel, yLabel: d.yLabel, xUnit: d.xUnit, yUnit: d.yUnit, xIsTime: d.xIsTime },
  });
  const bw = response.bandwidth || {};
  const selectorName = SELECTOR_NAMES[bw.selector] || bw.selector || "selector";
  drawScoreChart($("score-chart"), bw, {
    unitLabel: d.xIsTime ? "time" : d.xUnit || "x units",
    selectorName,
    formatBandwidth,
    ticks: d.xIsTime ? durationTicks : null,
  });
  renderBandwidth(request, bw, selectorName);
  renderDiagnostics(response.diagnostics || {});
  renderNoise(request, response.diagnostics || {});
  renderWarnings(response.warnings || []);
  renderSummary(request, response, chart, selectorName);
  renderScoreSummary(bw, selectorName);
  renderCautions(request);
  if (response.anomalies) {
    const count = response.anomalies.length;
    $("summary").append(` ${count === 0 ? "No reading is" : count === 1 ? "One reading is" : `${count} readings are`} marked as ${count === 1 ? "an anomaly" : "anomalies"} (outside the 99.9 % prediction interval of a robust fit).`);
  }
  $("legend-band").textContent = request.bands
    ? `${Math.round(request.bands.level * 100)} % ${request.bands.simultaneous ? "simultaneous" : "pointwise"} band (${BAND_NAMES[request.bands.method]})`
    : "band (none requested)";
  const origin = serviceBase();
  const withKey = $("api-key").value.trim() !== "";
  $("curl-code").textContent = curlCommand(origin, request, withKey);
  $("python-code").textContent = pythonSnippet(origin, request, withKey);
}

function renderBandwidth(request, bw, selectorName) {
  const h = bw.value;
  const readout = $("bw-readout");
  readout.dataset.value = String(h);
  if (request.bandwidth === "auto") {
    readout.textContent = `chosen by ${selectorName} (rule ${bw.rule || request.rule}): h = ${formatBandwidth(h)}`;
    if (Number.isFinite(h) && h > 0) setBandwidthControls(h);
  } else {
    readout.textContent = `h = ${formatBandwidth(h)}`;
  }
}

const DIAGNOSTIC_NAMES = {
  n: "points given",
  n_used: "points used (weight above zero)",
  effective_df: "effective degrees of freedom",
  residual_scale: "residual scale (noise SD estimate)",
  engine: "computation engine",
  kernel: "kernel",
  degree: "degree",
  x_min: "smallest x",
  x_max: "largest x",
  bands: "band",
  noise: "noise model used",
  noise_autocorrelation: "noise lag-1 autocorrelation",
};

/** Which noise path the service used, and the lag-1 estimate it reported. */
function renderNoise(request, diag) {
  const used = diag.noise || "independent";
  const phi = typeof diag.noise_autocorrelation === "number" ? formatNumber(diag.noise_autocorrelation, 2) : "not estimable";
  const how = request.noise === "auto" ? (used === "correlated" ? "found by the test" : "no correlation found") : `as chosen (${request.noise})`;
  const out = $("noise-readout");
  out.dataset.noise = used;
  out.textContent = `Noise treated as ${used}, ${how}; lag-1 autocorrelation ${phi}.`;
}

function describeBands(b) {
  const kind = b.simultaneous ? "simultaneous" : "pointwise";
  const reps = b.replicates ? `, ${b.replicates} replicates, seed ${b.seed}` : "";
  return `${formatNumber(b.level * 100, 3)} % ${kind}, ${BAND_NAMES[b.method] || b.method}${reps}`;
}

function renderDiagnostics(diag) {
  const dl = $("diagnostics");
  dl.replaceChildren();
  for (const [key, value] of Object.entries(diag)) {
    if (value === undefined) continue;
    const dt = document.createElement("dt");
    dt.textContent = DIAGNOSTIC_NAMES[key] || key.replace(/_/g, " ");
    const dd = document.createElement("dd");
    if (key === "residual_scale" && typeof value === "number") dd.textContent = formatY(value);
    else if ((key === "x_min" || key === "x_max") && typeof value === "number") dd.textContent = formatX(value);
    else if (key === "bands") dd.textContent = value ? describeBands(value) : "none requested";
    else if (typeof value === "number") dd.textContent = Number.isInteger(value) ? value.toLocaleString("en") : formatNumber(value, 4);
    else if (value === null) dd.textContent = "not defined";
    else if (typeof value === "object") dd.textContent = JSON.stringify(value);
    else dd.textContent = String(value);
    dl.append(dt, dd);
  }
}

function renderWarnings(warnings) {
  const ul = $("warnings");
  ul.replaceChildren();
  if (!warnings.length) {
    const li = document.createElement("li");
    li.className = "ok";
    li.textContent = "The service raised no warnings for this fit.";
    ul.append(li);
    return;
  }
  for (const w of warnings) {
    const li = document.createElement("li");
    li.className = "warning";
    li.append(w.message || w.code || String(w));
    if (w.code) {
      const code = document.createElement("code");
      code.textContent = w.code;
      li.append(" ", code);
    }
    ul.append(li);
  }
}

function renderSummary(request, response, chart, selectorName) {
  const d = state.data;
  const curve = response.curve || {};
  const bw = response.bandwidth || {};
  const parts = [];
  parts.push(`${DEGREE_NAMES[request.degree]} fit with the ${request.kernel} kernel to ${d.x.length.toLocaleString("en")} points of ${d.yLabel}${d.yUnit ? ` (${d.yUnit})` : ""} against ${d.xLabel}${d.xIsTime ? "" : d.xUnit ? ` (${d.xUnit})` : ""}.`);
  parts.push(request.bandwidth === "auto"
    ? `Bandwidth ${formatBandwidth(bw.value)}, chosen automatically by ${selectorName} with rule ${bw.rule || request.rule}.`
    : `Bandwidth ${formatBandwidth(bw.value)}, set by hand.`);
  const est = curve.estimate || [];
  let iMin = -1;
  let iMax = -1;
  est.forEach((v, i) => {
    if (v === null || !Number.isFinite(v)) return;
    if (iMin < 0 || v < est[iMin]) iMin = i;
    if (iMax < 0 || v > est[iMax]) iMax = i;
  });
  if (iMin >= 0) {
    parts.push(`The estimate is lowest, ${formatY(est[iMin])}, at ${formatX(curve.x[iMin])} and highest, ${formatY(est[iMax])}, at ${formatX(curve.x[iMax])}.`);
  }
  const undefinedCount = est.filter((v) => v === null).length;
  if (undefinedCount) parts.push(`At ${undefinedCount} of ${est.length} curve points the estimate is undefined (no data inside the kernel window) and the line is broken there.`);
  const gaps = response.gaps || [];
  if (gaps.length) {
    const spans = gaps.map((g) => `${formatX(g.start)} to ${formatX(g.end)}`).join("; ");
    parts.push(`The data have ${gaps.length} gap${gaps.length > 1 ? "s" : ""} with no readings (${spans}): the curve and band are not drawn across ${gaps.length > 1 ? "them" : "it"}.`);
  }
  const missing = (response.diagnostics || {}).n_missing || 0;
  if (missing) parts.push(`${missing.toLocaleString("en")} reading${missing > 1 ? "s" : ""} with a missing value ${missing > 1 ? "were" : "was"} left out.`);
  if (request.bands && curve.lower && curve.upper) {
    const widths = curve.upper.map((u, i) => (u === null || curve.lower[i] === null ? null : u - curve.lower[i])).filter((w) => w !== null);
    const mean = widths.reduce((a, b) => a + b, 0) / Math.max(1, widths.length);
    parts.push(`The ${Math.round(request.bands.level * 100)} % ${request.bands.simultaneous ? "simultaneous" : "pointwise"} band (${BAND_NAMES[request.bands.method]}) is on average ${formatY(mean)} wide.`);
  }
  if (chart.clipped) parts.push("Parts of the band or of the prediction intervals reach beyond the plotted range.");
  for (const p of response.predictions || []) {
    const where = formatX(p.x);
    if (p.estimate === null || p.estimate === undefined) {
      parts.push(`At ${where} the estimate is undefined.`);
      continue;
    }
    let text = `At ${where} the predicted value is ${formatY(p.estimate)}`;
    if (p.interval_lower !== null && p.interval_lower !== undefined) {
      text += `, with a prediction interval for a new observation from ${formatY(p.interval_lower)} to ${formatY(p.interval_upper)}`;
    }
    text += p.extrapolated ? " — extrapolated beyond the data, so unreliable." : p.in_gap ? " — inside a gap in the data, so never measured." : ".";
    parts.push(text);
  }
  const n = (response.warnings || []).length;
  parts.push(n ? `The service raised ${n} warning${n > 1 ? "s" : ""} (listed under Diagnostics).` : "The service raised no warnings.");
  $("summary").textContent = parts.join(" ");
}

function renderScoreSummary(bw, selectorName) {
  const node = $("score-summary");
  const c = bw.candidates;
  const s = bw.scores;
  if (!Array.isArray(c) || !Array.isArray(s) || c.length < 2) {
    node.textContent = bw.selector
      ? `${selectorName} chose h = ${formatBandwidth(bw.value)} without scoring a grid of candidates.`
      : "The bandwidth was set by hand, so no selector scores were computed. Choose “automatic” to see them.";
    return;
  }
  let best = -1;
  s.forEach((v, i) => {
    if (v !== null && Number.isFinite(v) && (best < 0 || v < s[best])) best = i;
  });
  const scored = s.filter((v) => v !== null && Number.isFinite(v)).length;
  let text = `${selectorName} scored ${scored} of ${c.length} candidate bandwidths from ${formatBandwidth(c[0])} to ${formatBandwidth(c[c.length - 1])}.`;
  if (best >= 0) text += ` The smallest score is at h = ${formatBandwidth(c[best])}.`;
  text += ` Chosen (rule ${bw.rule}): h = ${formatBandwidth(bw.value)}.`;
  if (best === 0 || best === c.length - 1) text += " The minimum sits at the edge of the grid, so the true optimum may lie outside it.";
  node.textContent = text;
}

function renderCautions(request) {
  const li = $("caution-band");
  if (request.bands && request.bands.simultaneous) {
    li.innerHTML = "<strong>This band is simultaneous.</strong> It is meant to cover the whole curve at once, so it is wider than a pointwise band. It still only covers the smoothed curve, which at this bandwidth can differ from the true one (smoothing bias).";
  } else {
    li.innerHTML = "<strong>The band is pointwise.</strong> At each x on its own it covers the curve with the stated probability; the whole curve need not lie inside it at once. Tick “simultaneous” for a band meant to cover the whole curve.";
  }
}

// ---------------------------------------------------------------- wiring

function updateBandControls() {
  const method = $("band-method").value;
  $("band-level").disabled = method === "none";
  $("band-simultaneous").disabled = method === "none";
  $("band-replicates").disabled = method === "none" || method === "analytic";
}

async function chooseDataset(name) {
  if (name === "pasted") {
    $("paste-box").open = true;
    if (state.pasted) {
      setData(state.pasted);
      scheduleRefit();
    } else {
      setStatus("Paste two columns of data and press “Plot pasted data”.");
      $("paste").focus();
    }
    return;
  }
  $("counts").checked = name === "parcel_depot";  // the depot logs parcels per hour: counts
  setBusy(true);
  try {
    setData(await loadDemo(name));
    scheduleRefit();
  } catch (err) {
    setBusy(false);
    setStatus(`Could not load the demo data “${name}”.`);
    showProblem(err.problem || { title: "Demo data unavailable", detail: err.message });
  }
}

function applyPaste() {
  const box = $("paste-error");
  let parsed;
  try {
    parsed = parseData($("paste").value);
  } catch (err) {
    box.textContent = `Could not read the pasted data: ${err.message}`;
    box.hidden = false;
    return;
  }
  box.hidden = true;
  const xName = $("paste-x-label").value.trim() || parsed.xName || (parsed.xIsTime ? "time" : "x");
  const yName = $("paste-y-label").value.trim() || parsed.yName || "y";
  state.pasted = {
    name: "pasted",
    x: parsed.x,
    y: parsed.y,
    title: "Pasted data",
    description: `${parsed.x.length} pasted rows.`,
    xLabel: xName,
    yLabel: yName,
    xUnit: "",
    yUnit: "",
    xIsTime: parsed.xIsTime,
  };
  $("dataset").value = "pasted";
  setData(state.pasted);
  scheduleRefit();
}

function wire() {
  $("dataset").addEventListener("change", (e) => chooseDataset(e.target.value));
  $("paste-apply").addEventListener("click", applyPaste);
  for (const id of ["kernel", "degree", "noise", "selector", "rule", "bw-min", "bw-max", "band-level", "band-simultaneous", "band-replicates", "robust", "counts", "anomalies"]) {
    $(id).addEventListener("change", scheduleRefit);
  }
  $("band-method").addEventListener("change", () => {
    updateBandControls();
    scheduleRefit();
  });
  $("predict-at").addEventListener("input", scheduleRefit);
  $("api-key").addEventListener("change", () => {
    if (state.data) scheduleRefit();
    else chooseDataset($("dataset").value);
  });
  for (const id of ["bw-auto", "bw-manual"]) {
    $(id).addEventListener("change", () => {
      setMode(currentMode());
      scheduleRefit();
    });
  }
  $("bw-slider").addEventListener("input", (e) => {
    setMode("manual");
    const h = sliderToH(Number(e.target.value));
    $("bw-value").value = String(Number(h.toPrecision(4)));
    e.target.setAttribute("aria-valuetext", `h = ${formatBandwidth(h)}`);
    $("bw-readout").textContent = `h = ${formatBandwidth(h)}`;
    scheduleRefit();
  });
  $("bw-value").addEventListener("change", (e) => {
    const h = Number(e.target.value);
    if (!(h > 0)) return;
    setMode("manual");
    setBandwidthControls(h);
    scheduleRefit();
  });
  for (const button of document.querySelectorAll("button.copy")) {
    button.addEventListener("click", async () => {
      const text = $(button.dataset.target).textContent;
      try {
        await navigator.clipboard.writeText(text);
        button.textContent = "Copied";
      } catch {
        const range = document.createRange();
        range.selectNodeContents($(button.dataset.target));
        const sel = window.getSelection();
        sel.removeAllRanges();
        sel.addRange(range);
        button.textContent = "Selected — press Ctrl+C";
      }
      setTimeout(() => {
        button.textContent = button.dataset.target === "curl-code" ? "Copy curl command" : "Copy Python snippet";
      }, 2000);
    });
  }
}

async function start() {
  wire();
  setMode("auto");
  updateBandControls();
  await loadDemoList();
  await chooseDataset($("dataset").value);
}

start();
