// "Use this from your code": the current request as a curl command and as a Python client call.

/** JSON with one top-level key per line and arrays kept on a single line. */
export function requestJson(request) {
  const lines = Object.entries(request).map(([k, v]) => `  ${JSON.stringify(k)}: ${JSON.stringify(v)}`);
  return `{\n${lines.join(",\n")}\n}`;
}

export function curlCommand(origin, request, withKey = false) {
  return [
    `curl -sS -X POST '${origin}/v1/smooth' \\`,
    "  -H 'Content-Type: application/json' \\",
    ...(withKey ? ['  -H "Authorization: Bearer $BANDWISE_API_KEY" \\'] : []),
    "  --data-binary @- <<'JSON'",
    requestJson(request),
    "JSON",
  ].join("\n");
}

/** A JSON value written as a Python literal. */
export function pythonLiteral(value) {
  if (value === null || value === undefined) return "None";
  if (value === true) return "True";
  if (value === false) return "False";
  if (typeof value === "number") return Number.isFinite(value) ? String(value) : "None";
  if (typeof value === "string") return JSON.stringify(value);
  if (Array.isArray(value)) return `[${value.map(pythonLiteral).join(", ")}]`;
  const items = Object.entries(value).map(([k, v]) => `${JSON.stringify(k)}: ${pythonLiteral(v)}`);
  return `{${items.join(", ")}}`;
}

export function pythonSnippet(origin, request, withKey = false) {
  const { x, y, ...options } = request;
  const args = Object.entries(options).map(([k, v]) => `    ${k}=${pythonLiteral(v)},`);
  return [
    ...(withKey ? ["import os", ""] : []),
    "from service.client import BandwiseClient",
    "",
    `x = ${pythonLiteral(x)}`,
    `y = ${pythonLiteral(y)}`,
    "",
    withKey
      ? `with BandwiseClient(${JSON.stringify(origin)}, api_key=os.environ["BANDWISE_API_KEY"]) as client:`
      : `with BandwiseClient(${JSON.stringify(origin)}) as client:`,
    "    result = client.smooth(",
    "        x,",
    "        y,",
    ...args.map((a) => `    ${a}`),
    "    )",
    "",
    "print(result.bandwidth.value, result.diagnostics.effective_df)",
    "curve = result.curve.arrays()  # numpy arrays; NaN where the estimate is undefined",
  ].join("\n");
}
