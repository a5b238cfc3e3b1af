"""Descriptions shown in the OpenAPI document and on /docs."""

CAUTIONS = """\
**Cautions — read before acting on a result**

* **Bands are pointwise** unless you ask for `"simultaneous": true`: a 95 % pointwise band covers the true
  curve at each x on its own with about 95 % probability, not the whole curve at once. Answers with pointwise
  bands carry the warning `pointwise_bands`.
* **Extrapolation**: `predict_at` (and `curve.at`) values outside the data range are extrapolations. They are
  answered, flagged with `"extrapolated": true` and the warning `extrapolation`; the estimate there only extends
  the local fit beyond the data and can be far off.
* **Automatic bandwidths can be implausible.** A selector optimises a score, and on some data (outliers, gaps,
  serial correlation such as readings every 15 minutes) the best score belongs to a curve that is too rough or
  too flat. Look at `bandwidth.candidates` / `bandwidth.scores` and at the warnings `selection_at_grid_edge`,
  `flat_selection_score` and `implausibly_rough`; fix the bandwidth when in doubt.
* **Empty windows**: with a compact kernel and a small bandwidth, x values with no data within one bandwidth get
  a `null` estimate and the warning `empty_window`.
"""

API_DESCRIPTION = f"""\
Kernel smoothing over HTTP: send `x`/`y` arrays, get back a smoothed curve, fitted values, uncertainty bands
and predictions at new points, with the bandwidth choice and diagnostics laid open.

The examples use an invented scenario: the Harbour Street cold store logs compressor power (kW) against outdoor
temperature (°C) every 15 minutes, and its parcel depot logs hourly parcel counts with epoch-millisecond
timestamps. `GET /v1/demo/{{name}}` returns the full demo series.

**Errors** are RFC 9457 problem details (`application/problem+json`) with `type`, `title`, `status`, `detail`,
`request_id` and, for validation failures, `errors` (one entry per offending field). 503 and 429 answers carry
`Retry-After`. Numbers that are undefined are `null`, never `NaN`.

**Authentication** (only when the operator set `BANDWISE_API_KEYS`): `Authorization: Bearer <key>` on `/v1/*`.

{CAUTIONS}
"""

SMOOTH_DESCRIPTION = f"""\
Fit one series with a local polynomial kernel smoother and return the curve, optional fitted values and
residuals, optional bands, predictions at `predict_at`, diagnostics and warnings.

With `"bandwidth": "auto"` (the default) the bandwidth is chosen by `selector` (default `gcv`) over
`candidates` bandwidths; the answer's `bandwidth` object lists every candidate and its score.

`bands` adds `lower`, `upper` and `se` to the curve, and to each prediction `lower`/`upper` (band for the
curve) plus `interval_lower`/`interval_upper` (prediction interval for a new observation).

{CAUTIONS}
"""

BATCH_DESCRIPTION = """\
Smooth many series in one call. `results` has one slot per series, in order: either a full smooth response, or
`{"problem": {...}}` for a series that was invalid or could not be fitted — the other series are not affected.
A body that is not valid JSON, or exceeds the batch limits, is refused as a whole.
"""

BANDWIDTH_DESCRIPTION = """\
Bandwidth selection only: score every candidate bandwidth with `selector` and return the chosen one with all
candidates and scores (lower is better; `null` where a candidate could not be scored). Automatic bandwidths can
be implausible: look at the scores and the warnings before using one.
"""
