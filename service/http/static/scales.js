// Scales, axis ticks and number/date formatting for the charts.

export function linearScale([d0, d1], [r0, r1]) {
  const span = d1 - d0 || 1;
  const f = (v) => r0 + ((v - d0) / span) * (r1 - r0);
  f.domain = [d0, d1];
  f.range = [r0, r1];
  return f;
}

export function logScale([d0, d1], [r0, r1]) {
  const l0 = Math.log(d0);
  const span = Math.log(d1) - l0 || 1;
  const f = (v) => r0 + ((Math.log(v) - l0) / span) * (r1 - r0);
  f.domain = [d0, d1];
  f.range = [r0, r1];
  return f;
}

/** Extent of the finite numbers in one or more arrays, or null. */
export function extent(...arrays) {
  let lo = Infinity;
  let hi = -Infinity;
  for (const arr of arrays) {
    if (!arr) continue;
    for (const v of arr) {
      if (v === null || v === undefined || !Number.isFinite(v)) continue;
      if (v < lo) lo = v;
      if (v > hi) hi = v;
    }
  }
  return lo <= hi ? [lo, hi] : null;
}

export function pad([lo, hi], fraction) {
  const span = hi - lo || Math.abs(hi) || 1;
  return [lo - span * fraction, hi + span * fraction];
}

function niceStep(span, count) {
  const raw = span / Math.max(1, count);
  const mag = 10 ** Math.floor(Math.log10(raw));
  const norm = raw / mag;
  const step = norm < 1.5 ? 1 : norm < 3 ? 2 : norm < 7 ? 5 : 10;
  return step * mag;
}

export function linearTicks([lo, hi], count = 6) {
  const step = niceStep(hi - lo, count);
  const ticks = [];
  for (let v = Math.ceil(lo / step) * step; v <= hi + step * 1e-9; v += step) {
    ticks.push(Math.abs(v) < step * 1e-9 ? 0 : v);
  }
  return { ticks, step };
}

export function logTicks([lo, hi]) {
  const ticks = [];
  for (let e = Math.floor(Math.log10(lo)); e <= Math.ceil(Math.log10(hi)); e++) {
    for (const m of [1, 2, 5]) {
      const v = m * 10 ** e;
      if (v >= lo * (1 - 1e-9) && v <= hi * (1 + 1e-9)) ticks.push(v);
    }
  }
  if (ticks.length < 3) return linearTicks([lo, hi], 5).ticks.filter((v) => v > 0);
  return ticks;
}

const HOUR = 3600e3;
const DAY = 24 * HOUR;
const TIME_STEPS = [HOUR, 2 * HOUR, 3 * HOUR, 6 * HOUR, 12 * HOUR, DAY, 2 * DAY, 7 * DAY, 14 * DAY, 28 * DAY];

/** Ticks for epoch-millisecond values at whole UTC hours or days. */
export function timeTicks([lo, hi], count = 6) {
  const span = hi - lo;
  const step = TIME_STEPS.find((s) => span / s <= count) ?? niceStep(span, count);
  // Weekly ticks fall on Mondays (epoch day 4, 1970-01-05, was a Monday).
  const origin = step >= 7 * DAY ? 4 * DAY : 0;
  const ticks = [];
  for (let v = Math.ceil((lo - origin) / step) * step + origin; v <= hi; v += step) ticks.push(v);
  return { ticks, step };
}

const DURATION_TICKS = [
  1e3, 10e3, 60e3, 5 * 60e3, 15 * 60e3, 30 * 60e3,
  HOUR, 2 * HOUR, 3 * HOUR, 6 * HOUR, 12 * HOUR, DAY, 2 * DAY, 4 * DAY, 7 * DAY, 14 * DAY, 28 * DAY, 56 * DAY,
];

/** Round durations (minutes, hours, days, weeks) inside a bandwidth range, for a log axis. */
export function durationTicks([lo, hi]) {
  const inside = DURATION_TICKS.filter((v) => v >= lo && v <= hi);
  return inside.length >= 2 ? inside : logTicks([lo, hi]);
}

const MONTHS = ["Jan", "Feb", "Mar", "Apr", "May", "Jun", "Jul", "Aug", "Sep", "Oct", "Nov", "Dec"];
const two = (n) => String(n).padStart(2, "0");

export function formatDateTick(ms, step) {
  const d = new Date(ms);
  const day = `${d.getUTCDate()} ${MONTHS[d.getUTCMonth()]}`;
  if (step >= DAY) return day;
  const hm = `${two(d.getUTCHours())}:${two(d.getUTCMinutes())}`;
  return d.getUTCHours() === 0 ? `${day}` : hm;
}

export function formatDate(ms) {
  const d = new Date(ms);
  return `${d.getUTCFullYear()}-${two(d.getUTCMonth() + 1)}-${two(d.getUTCDate())} ${two(d.getUTCHours())}:${two(d.getUTCMinutes())} UTC`;
}

export function formatIsoInput(ms) {
  const d = new Date(ms);
  return `${d.getUTCFullYear()}-${two(d.getUTCMonth() + 1)}-${two(d.getUTCDate())}T${two(d.getUTCHours())}:${two(d.getUTCMinutes())}`;
}

/** A duration in milliseconds in words, e.g. "5.2 hours". */
export function formatDuration(ms) {
  const units = [
    [DAY, "day"],
    [HOUR, "hour"],
    [60e3, "minute"],
    [1e3, "second"],
  ];
  for (const [size, name] of units) {
    if (ms >= size) {
      const text = formatNumber(ms / size, 3);
      return `${text} ${name}${text === "1" ? "" : "s"}`;
    }
  }
  return `${formatNumber(ms, 3)} ms`;
}

/** Format a number with about `digits` significant digits, using a real minus sign. */
export function formatNumber(v, digits = 3) {
  if (v === null || v === undefined || !Number.isFinite(v)) return "—";
  if (v === 0) return "0";
  const a = Math.abs(v);
  let s;
  if (a >= 1e6 || a < 1e-3) s = v.toExponential(digits - 1).replace(/\.?0+e/, "e");
  else {
    const decimals = Math.max(0, digits - 1 - Math.floor(Math.log10(a)));
    s = v.toFixed(Math.min(decimals, 6));
    if (s.includes(".")) s = s.replace(/0+$/, "").replace(/\.$/, "");
  }
  return s.replace(/^-/, "\u2212");
}

/** Tick label for a linear axis with the given step. */
export function formatTick(v, step) {
  const decimals = Math.max(0, -Math.floor(Math.log10(step) + 1e-9));
  if (Math.abs(v) >= 1e6) return formatNumber(v, 3);
  return v.toFixed(Math.min(decimals, 6)).replace(/^-/, "\u2212");
}
