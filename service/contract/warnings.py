"""Every warning code the service can send in ``warnings[].code``, with its meaning: the one list.

Codes are stable; messages are for a person and may change.  The codes come
from ``estimators`` (selection, fit and band cautions) and from the worker's
own checks of curve and prediction points; a test reads both sources and
checks that each code they can send is listed here.
"""

from __future__ import annotations

WARNING_CODES: dict[str, str] = {
    "implausibly_rough": "The automatic bandwidth gives a fit with very many effective degrees of freedom for the number of distinct x values: it may follow the noise. Look at the curve; consider a larger bandwidth.",
    "selection_at_grid_edge": "The chosen bandwidth is the smallest or largest candidate (or a formula's value outside the candidate range was clipped to it): the best bandwidth may lie beyond the range. Widen bandwidth_min / bandwidth_max.",
    "correlated_noise": "The noise of neighbouring readings (in x order) was treated as correlated: found by the test with noise auto (the message gives the lag-1 autocorrelation estimate), or asked for with noise correlated. The bandwidth then comes from modified cross-validation and standard errors, bands and prediction intervals allow for the correlation. Slow real variation and strongly correlated noise cannot be told apart: if the wiggles are real, send noise independent.",
    "flat_selection_score": "The selector's score hardly changes over a wide range of bandwidths (within one standard error): the data do not pin the bandwidth down.",
    "unscored_candidates": "Some candidate bandwidths have no score (the fit or the score is undefined there); their `scores` entries are null.",
    "sparse_design": "The x values are so uneven that the candidate range had to be widened to give every window enough distinct x values.",
    "reference_rule": "The rule of thumb uses only the spread of x (normal reference), not the shape of the curve; compare it with a score-based selector.",
    "few_points": "Only a few points carry weight: the curve is poorly determined.",
    "degree_reduced": "At some points the kernel window holds too few distinct x values for the local polynomial degree, so a lower degree was fitted there (the message says how many points and which fit).",
    "noise_not_estimable": "The fit passes through every data point, so the residuals carry no information about the noise: no band, standard error or prediction interval can be given. Use a larger bandwidth.",
    "pointwise_bands": "The bands are pointwise: each covers the curve at one x on its own, not the whole curve at once. Ask for simultaneous bands to cover the whole curve.",
    "empty_window": "Some curve or prediction points have no data inside the kernel window; the estimate there is null. Use a larger bandwidth or the gaussian kernel.",
    "data_gap": "The data have gaps wider than max_gap (listed in `gaps`): the curve is null strictly inside them, and predictions there are flagged in_gap; an estimate inside a gap was never measured.",
    "missing_values": "Some readings had a null in x, y or weights and were left out (diagnostics.n_missing says how many).",
    "outliers": "The robust fit left some readings out as outliers (diagnostics.n_outliers; fitted.robustness_weights marks them with include_fitted).",
    "counts_bands": "For family poisson the bands are analytic and pointwise, computed on the log scale: another method or simultaneous bands were asked for and this band was given instead.",
    "extrapolation": "Some curve or prediction points lie outside the data range: the estimate there extends the local fit beyond the data and can be far off.",
}
