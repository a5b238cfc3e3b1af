// Parsing of pasted data and of the prediction-points field.

const ISO_DATE = /^\d{4}-\d{2}-\d{2}([T ]\d{2}:\d{2}(:\d{2}(\.\d+)?)?)?(Z|[+-]\d{2}:?\d{2})?$/;

/** Parse an ISO 8601 date or date-time as epoch milliseconds (UTC when no offset is given). */
export function parseIsoDate(text) {
  const s = text.trim();
  if (!ISO_DATE.test(s)) return null;
  let iso = s.replace(" ", "T");
  if (!/(Z|[+-]\d{2}:?\d{2})$/.test(iso)) iso += iso.includes("T") ? "Z" : "T00:00Z";
  const ms = Date.parse(iso);
  return Number.isFinite(ms) ? ms : null;
}

function parseNumber(text) {
  const s = text.trim().replace(/^\u2212/, "-");
  if (s === "") return null;
  const v = Number(s);
  return Number.isFinite(v) ? v : null;
}

function splitRow(line) {
  if (line.includes("\t")) return line.split("\t");
  if (line.includes(";")) return line.split(";");
  if (line.includes(",")) return line.split(",");
  return line.trim().split(/\s+/);
}

function unquote(s) {
  return s.trim().replace(/^"(.*)"$/, "$1").replace(/^'(.*)'$/, "$1");
}

function fromPairs(pairs) {
  const x = [];
  const y = [];
  pairs.forEach((p, i) => {
    if (!Array.isArray(p) || p.length !== 2) throw new Error(`item ${i + 1} is not an [x, y] pair`);
    x.push(p[0]);
    y.push(p[1]);
  });
  return { x, y };
}

function checkNumbers(values, name) {
  values.forEach((v, i) => {
    if (typeof v !== "number" || !Number.isFinite(v)) {
      throw new Error(`${name}[${i}] is not a finite number`);
    }
  });
}

function parseJson(text) {
  let doc;
  try {
    doc = JSON.parse(text);
  } catch (err) {
    throw new Error(`not valid JSON: ${err.message}`);
  }
  let x;
  let y;
  if (Array.isArray(doc)) {
    if (doc.length && !Array.isArray(doc[0]) && typeof doc[0] === "object") {
      x = doc.map((d) => d.x);
      y = doc.map((d) => d.y);
    } else {
      ({ x, y } = fromPairs(doc));
    }
  } else if (doc && typeof doc === "object" && Array.isArray(doc.x) && Array.isArray(doc.y)) {
    x = doc.x;
    y = doc.y;
  } else {
    throw new Error('JSON must be {"x": [...], "y": [...]}, [[x, y], ...] or [{"x": .., "y": ..}, ...]');
  }
  if (x.length !== y.length) throw new Error(`x has ${x.length} values but y has ${y.length}`);
  checkNumbers(x, "x");
  checkNumbers(y, "y");
  return { x, y, xName: null, yName: null, xIsTime: false };
}

function parseDelimited(text) {
  const lines = text.split(/\r?\n/);
  const x = [];
  const y = [];
  let xName = null;
  let yName = null;
  let xIsTime = null;
  lines.forEach((raw, index) => {
    const line = raw.trim();
    if (line === "" || line.startsWith("#")) return;
    const cells = splitRow(line).map(unquote);
    if (cells.length !== 2) {
      throw new Error(`line ${index + 1}: expected 2 columns, found ${cells.length}`);
    }
    const yv = parseNumber(cells[1]);
    let xv = parseNumber(cells[0]);
    let isTime = false;
    if (xv === null) {
      xv = parseIsoDate(cells[0]);
      isTime = xv !== null;
    }
    if (xv === null || yv === null) {
      if (x.length === 0 && xName === null) {
        [xName, yName] = cells;
        return;
      }
      throw new Error(`line ${index + 1}: "${line}" is not two numbers`);
    }
    if (xIsTime === null) xIsTime = isTime;
    else if (xIsTime !== isTime) throw new Error(`line ${index + 1}: mixes dates and numbers in the first column`);
    x.push(xv);
    y.push(yv);
  });
  return { x, y, xName, yName, xIsTime: Boolean(xIsTime) };
}

/**
 * Parse pasted data: JSON ({"x":[], "y":[]}, [[x, y], ...], [{x, y}, ...]) or two delimited columns.
 * Returns {x, y, xName, yName, xIsTime}; throws Error with a message for a person.
 */
export function parseData(text) {
  const s = text.trim();
  if (s === "") throw new Error("nothing pasted yet");
  const parsed = s.startsWith("{") || s.startsWith("[") ? parseJson(s) : parseDelimited(s);
  if (parsed.x.length < 2) throw new Error(`need at least 2 rows of data, found ${parsed.x.length}`);
  return parsed;
}

/** Parse the comma-separated prediction points; dates allowed when the axis is time. */
export function parsePoints(text, xIsTime) {
  const out = [];
  const tokens = text.split(/[,;]/).map((t) => t.trim()).filter((t) => t !== "");
  for (const token of tokens) {
    let v = parseNumber(token);
    if (v === null && xIsTime) v = parseIsoDate(token);
    if (v === null) {
      throw new Error(`"${token}" is not ${xIsTime ? "a number or an ISO date" : "a number"}`);
    }
    out.push(v);
  }
  return out;
}
