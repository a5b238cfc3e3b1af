"""Confidence bands for the curve: analytic, wild bootstrap, residual bootstrap; pointwise or simultaneous."""

from __future__ import annotations

import math
from typing import Any

import numpy as np
from scipy.special import ndtri

from ..local_poly import LocalPolynomial
from .arguments import METHODS, MULTIPLIERS, check_level, check_points, check_replicates, check_seed
from .bootstrap import deviations, point_slabs, small_sample_factor
from .cautions import band_cautions
from .local_fits import centre_degree, coefficient_row, local_fit, sort_points, unsort, variance
from .noise import noise_column, noise_scale
from .residuals import adjusted_residuals
from .results import Bands
from .weights import WeightBlocks, make_nodes


def bands(
    smoother: LocalPolynomial,
    points: Any,
    level: float = 0.95,
    method: str = "wild_bootstrap",
    replicates: int = 500,
    seed: int | None = 0,
    simultaneous: bool = False,
    *,
    multiplier: str | None = None,
    bias_correction: bool = True,
    engine: str = "auto",
) -> Bands:
    """Confidence band for the curve at ``points``.

    Parameters
    ----------
    smoother : Smoother
    points : array_like
        Any order; results follow it.
    level : float
        Nominal coverage, in (0, 1).
    method : {"wild_bootstrap", "residual_bootstrap", "analytic"}
        See ``docs/methods.md``.
    replicates : int
        Bootstrap replicates (for ``analytic``: draws of the sup-t statistic
        when ``simultaneous``); at least ``2 / (1 - level)``.
    seed : int or None
        The same seed gives identical bands; None draws fresh entropy.
    simultaneous : bool
        Cover all requested points at once (sup-t band) instead of each point
        separately.
    multiplier : {"rademacher", "mammen", "gaussian"}, optional
        Wild bootstrap weights; default ``"rademacher"`` for pointwise and
        ``"gaussian"`` for simultaneous bands (see ``docs/methods.md``).
    bias_correction : bool
        Robust bias correction (default). False gives the plain band around
        ``smoother.predict``, which under-covers at data-driven bandwidths.
    engine : {"auto", "exact", "binned"}
        Where bootstrap errors meet the weights; ``auto`` bins when
        ``n * replicates`` is large (see ``docs/methods.md``).

    Returns
    -------
    Bands

    Notes
    -----
    Bands are pointwise unless ``simultaneous``; they describe sampling
    variability only; outside the data range they are flagged
    ``extrapolation`` and are not supported by the data.
    """
    if method not in METHODS:
        raise ValueError(f"unknown method {method!r}; choose one of {', '.join(METHODS)}")
    if multiplier is None:
        multiplier = "gaussian" if simultaneous else "rademacher"
    if multiplier not in MULTIPLIERS:
        raise ValueError(f"unknown multiplier {multiplier!r}; choose one of {', '.join(MULTIPLIERS)}")
    if engine not in ("auto", "exact", "binned"):
        raise ValueError(f"unknown engine {engine!r}; choose one of auto, exact, binned")
    s = smoother
    t = check_points(points)
    lev = check_level(level)
    simultaneous = bool(simultaneous)
    needs_draws = method != "analytic" or simultaneous
    reps = check_replicates(replicates, lev) if needs_draws else None
    seed_used = check_seed(seed) if needs_draws else None

    ts, perm = sort_points(t)
    degree = centre_degree(s.degree) if bias_correction else s.degree
    fit = local_fit(s, ts, degree)
    centre = fit.beta[:, 0] + s.sample.y_centre
    a = coefficient_row(fit, 0, s.bandwidth)
    ok = np.isfinite(centre) & np.isfinite(a[:, 0])
    m = ts.size
    lower = np.full(m, np.nan)
    upper = np.full(m, np.nan)
    se = np.full(m, np.nan)
    crit = math.nan
    alpha = 1.0 - lev
    res = adjusted_residuals(s)
    noise_known = bool(res.informative.any())
    ok &= noise_known  # no residual carries noise information: no band anywhere
    # the wild bootstrap's pointwise band needs no noise model; everything else uses the local scale
    noise = None if (method == "wild_bootstrap" and not simultaneous) else noise_scale(s)
    t_ok, a_ok = ts[ok], a[ok]
    if ok.any():
        scale = None if noise is None else np.sqrt(variance(s, t_ok, a_ok, noise_column(s, noise)))
        if method == "analytic":
            assert scale is not None  # analytic bands always use the noise scale
            se_ok = scale
            if simultaneous:
                assert reps is not None
                # draws of the Gaussian process with the smoother's covariance under the local noise
                # scale, through the same blocked machinery as the bootstrap (no m x m matrix)
                nodes = make_nodes(s, t_ok, reps, engine)
                sup = np.zeros(reps)
                for i0, i1 in point_slabs(t_ok.size, reps):
                    blocks = WeightBlocks(s, t_ok[i0:i1], a_ok[i0:i1], nodes)
                    dev = deviations(s, blocks, "analytic", reps, np.random.default_rng(seed_used), res, noise, "gaussian")
                    with np.errstate(divide="ignore", invalid="ignore"):
                        stat = np.abs(dev) / se_ok[i0:i1, None]
                    np.maximum(sup, np.where(np.isfinite(stat), stat, 0.0).max(axis=0), out=sup)
                    del dev, stat
                crit = float(np.quantile(sup, lev))
            else:
                crit = float(ndtri(1.0 - alpha / 2.0))
            lower[ok] = centre[ok] - crit * se_ok
            upper[ok] = centre[ok] + crit * se_ok
            se[ok] = se_ok
        else:
            assert reps is not None  # the bootstrap methods always draw
            nodes = make_nodes(s, t_ok, reps, engine)
            m_ok = t_ok.size
            boot_se, q_lo, q_hi = np.empty(m_ok), np.empty(m_ok), np.empty(m_ok)
            factor: np.ndarray | float = np.ones(m_ok) if method == "wild_bootstrap" else 1.0
            sup = np.zeros(reps)
            for i0, i1 in point_slabs(m_ok, reps):
                # every slab of points sees the same draws (the same seed), so slabs join into one bootstrap
                blocks = WeightBlocks(s, t_ok[i0:i1], a_ok[i0:i1], nodes)
                dev = deviations(s, blocks, method, reps, np.random.default_rng(seed_used), res, noise, multiplier)
                boot_se[i0:i1] = np.sqrt(np.mean(dev * dev, axis=1))
                if simultaneous:
                    # sup-t: the critical value comes from the bootstrap process standardised by its own
                    # scale (it depends on the correlations only); the band's width follows the smooth
                    # analytic scale, because a wild-bootstrap scale inherits the noise of single squared
                    # residuals, which a maximum over many points turns into under-coverage
                    with np.errstate(divide="ignore", invalid="ignore"):
                        stat = np.abs(dev) / boot_se[i0:i1, None]
                    np.maximum(sup, np.where(np.isfinite(stat), stat, 0.0).max(axis=0), out=sup)
                    del stat
                q_lo[i0:i1], q_hi[i0:i1] = np.quantile(dev, [alpha / 2.0, 1.0 - alpha / 2.0], axis=1)
                if isinstance(factor, np.ndarray):
                    factor[i0:i1] = small_sample_factor(blocks, s.sample.ws, lev)
                del dev
            if simultaneous:
                crit = float(np.quantile(sup, lev))
                assert scale is not None  # simultaneous bands always use the noise scale
                lower[ok] = centre[ok] - crit * scale
                upper[ok] = centre[ok] + crit * scale
                se[ok] = scale
            # pointwise basic intervals; a simultaneous band never lies inside them
            pw_lower = centre[ok] - factor * q_hi
            pw_upper = centre[ok] - factor * q_lo
            if simultaneous:
                lower[ok] = np.minimum(lower[ok], pw_lower)
                upper[ok] = np.maximum(upper[ok], pw_upper)
            else:
                lower[ok], upper[ok] = pw_lower, pw_upper
                se[ok] = boot_se
    noise_kind = "residuals" if noise is None else noise.kind
    return Bands(
        lower=unsort(lower, perm),
        upper=unsort(upper, perm),
        se=unsort(se, perm),
        estimate=unsort(np.where(ok, centre, np.nan), perm),
        method=method,
        level=lev,
        simultaneous=simultaneous,
        replicates=reps,
        seed=seed_used,
        critical_value=crit,
        bias_corrected=bool(bias_correction),
        centre_degree=degree,
        noise=noise_kind,
        warnings=band_cautions(s, t, centre, fit, simultaneous, noise_known=noise_known),
    )
