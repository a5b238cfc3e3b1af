"""Cautions attached to bands and slope summaries."""

from __future__ import annotations

import numpy as np

from ..cautions import Caution
from ..local_poly import LocalPolynomial
from .local_fits import LocalFit

NOISE_NOT_ESTIMABLE = (
    "the fit passes through every data point (each point alone determines its local fit), so the residuals "
    "carry no information about the noise: no band, standard error or prediction interval can be given; "
    "use a larger bandwidth"
)


def band_cautions(s: LocalPolynomial, t: np.ndarray, centre: np.ndarray, fit: LocalFit, simultaneous: bool, noise_known: bool = True) -> list[Caution]:
    out: list[Caution] = []
    if not noise_known:
        out.append(Caution("noise_not_estimable", NOISE_NOT_ESTIMABLE))
    if not simultaneous:
        out.append(
            Caution(
                "pointwise_bands",
                "the band is pointwise: it covers the curve at each point separately, not the whole curve at once",
            )
        )
    bad = ~np.isfinite(centre)
    if bad.any():
        out.append(Caution("empty_window", f"{int(bad.sum())} points have no data in their window; no band there"))
    ext = s.extrapolated(t)
    if ext.any():
        out.append(
            Caution(
                "extrapolation",
                f"{int(ext.sum())} points lie outside the data range [{s.x_min:g}, {s.x_max:g}]; the band there "
                "extends the edge fit and is not supported by the data",
            )
        )
    reduced = (fit.degree_used >= 0) & (fit.degree_used < fit.degree)
    if reduced.any():
        out.append(
            Caution(
                "degree_reduced",
                f"{int(reduced.sum())} points have too few distinct x values in their window for the "
                f"degree-{fit.degree} centre; the band there is less bias-corrected",
            )
        )
    return out
