"""Direct plug-in bandwidth (Ruppert, Sheather and Wand 1995).

Method notes: ``docs/methods.md`` (bandwidth selection: selectors, plugin).
"""

from __future__ import annotations

import math
from collections.abc import Callable
from functools import cache

import numpy as np
from scipy import integrate

from ..kernels import KERNELS, Kernel
from ..local_poly import LocalPolynomial
from ..sample import SortedSample
from .grid import knn_distances

#: plug-in: share of the x range left out at each end by the weight function
PLUGIN_TRIM = 0.05
#: plug-in: most blocks of the polynomial pilot
PLUGIN_MAX_BLOCKS = 25
#: plug-in: block counts tried by Mallows' Cp
PLUGIN_BLOCK_COUNTS = (1, 2, 3, 4, 5, 6, 8, 10, 12, 15, 20, 25)


def _kernel_moment(kernel: Kernel, k: int, power: int = 1) -> float:
    return _kernel_moment_cached(kernel.name, k, power)


@cache
def _kernel_moment_cached(name: str, k: int, power: int) -> float:
    kern = KERNELS[name]
    if k % 2 == 1:
        return 0.0
    lim = kern.support if math.isfinite(kern.support) else math.inf

    def f(u: float) -> float:
        return u**k * float(kern(np.array([u]))[0]) ** power

    val: float
    val, _ = integrate.quad(f, 0.0, lim, limit=200, epsabs=0.0, epsrel=1e-12)
    return 2.0 * val


@cache
def _equivalent_kernel(name: str, order: int, nu: int) -> tuple[float, float]:
    """``R(K*_nu)`` and ``B = int u^(order+1) K*_nu(u) du`` for a local polynomial of ``order``.

    ``K*_nu(u) = e_nu^T S^-1 (1, u, ..., u^order)^T K(u)`` with ``S_jl = mu_{j+l}(K)``
    (Fan & Gijbels 1996, Section 3.2.2).
    """
    kern = KERNELS[name]
    mom = np.array([_kernel_moment(kern, k) for k in range(2 * order + 2)])
    smat = np.array([[mom[j + i] for i in range(order + 1)] for j in range(order + 1)])
    coef = np.linalg.solve(smat, np.eye(order + 1)[nu])
    mom2 = np.array([_kernel_moment(kern, k, power=2) for k in range(2 * order + 1)])
    rough = float(sum(coef[j] * coef[i] * mom2[j + i] for j in range(order + 1) for i in range(order + 1)))
    bias = float(sum(coef[i] * mom[i + order + 1] for i in range(order + 1)))
    return rough, bias


def _blocked_polynomial(
    xs: np.ndarray, yc: np.ndarray, wt: np.ndarray, q: int, inside: np.ndarray
) -> tuple[float, float, int]:
    """Blocked polynomial pilot of degree ``q + 2`` (Ruppert, Sheather & Wand 1995, Section 4).

    The sorted data are cut into ``N`` blocks of equal size and a polynomial is
    fitted by weighted least squares in each; ``N`` is chosen by Mallows' Cp
    among :data:`PLUGIN_BLOCK_COUNTS` up to
    ``N_max = max(min(n // 20, PLUGIN_MAX_BLOCKS), 1)`` (RSW cap ``N_max`` at 5;
    the larger cap lets the pilot follow a curve whose roughness varies along
    x, and Cp still picks few blocks for a smooth one). Each block keeps at
    least twice as many distinct x values as the polynomial has coefficients.
    Returns ``sigma^2``, ``theta_{q,q+2} = n^-1 sum m^(q)(X_i) m^(q+2)(X_i)``
    over the points ``inside`` the weight region, and ``N``.
    """
    n = xs.size
    deg = q + 2
    npar = deg + 1
    if np.unique(xs).size < npar + 1:
        raise ValueError(f"plug-in selection needs at least {npar + 1} distinct x values; use gcv")
    nmax = max(min(n // 20, PLUGIN_MAX_BLOCKS), 1)
    while nmax > 1 and min(np.unique(b).size for b in np.array_split(xs, nmax)) < 2 * npar:
        nmax -= 1
    counts = sorted({c for c in PLUGIN_BLOCK_COUNTS if c < nmax} | {nmax})
    fits: dict[int, tuple[float, np.ndarray, np.ndarray]] = {}
    for nb in counts:
        rss = 0.0
        dq = np.empty(n)
        dq2 = np.empty(n)
        for idx in np.array_split(np.arange(n), nb):
            xb = xs[idx]
            mid = 0.5 * (xb[0] + xb[-1])
            half = max(0.5 * (xb[-1] - xb[0]), np.finfo(float).tiny)
            z = (xb - mid) / half
            coef = np.polynomial.polynomial.polyfit(z, yc[idx], deg, w=np.sqrt(wt[idx]))
            res = yc[idx] - np.polynomial.polynomial.polyval(z, coef)
            rss += float(np.sum(wt[idx] * res * res))
            dq[idx] = np.polynomial.polynomial.polyval(z, np.polynomial.polynomial.polyder(coef, q)) / half**q
            dq2[idx] = np.polynomial.polynomial.polyval(z, np.polynomial.polynomial.polyder(coef, q + 2)) / half ** (q + 2)
        fits[nb] = (rss, dq, dq2)
    dof_max = n - npar * nmax
    ref = fits[nmax][0] / dof_max if dof_max > 0 else math.nan
    if math.isfinite(ref) and ref > 0:
        best = min(fits, key=lambda nb: fits[nb][0] / ref - (n - 2 * npar * nb))
    else:
        best = 1
    rss, dq, dq2 = fits[best]
    sigma2 = rss / max(n - npar * best, 1)
    theta = float(np.sum((dq * dq2)[inside])) / n
    return sigma2, theta, best


def _difference_variance(xs: np.ndarray, yc: np.ndarray, wt: np.ndarray) -> float:
    """Noise variance from pseudo-residuals of neighbouring triples (Gasser, Sroka & Jennen-Steinmetz 1986).

    ``e_i = a_i y_{i-1} + b_i y_{i+1} - y_i`` with ``a_i = (x_{i+1} - x_i) / (x_{i+1} - x_{i-1})``,
    ``b_i = 1 - a_i`` (both 1/2 inside a tie); with precisions ``w``,
    ``Var(e_i) = sigma^2 (a_i^2 / w_{i-1} + b_i^2 / w_{i+1} + 1 / w_i)``.
    """
    if xs.size < 3:
        return math.nan
    x0, x1, x2 = xs[:-2], xs[1:-1], xs[2:]
    gap = x2 - x0
    with np.errstate(divide="ignore", invalid="ignore"):
        a = np.where(gap > 0, (x2 - x1) / gap, 0.5)
    b = 1.0 - a
    e = a * yc[:-2] + b * yc[2:] - yc[1:-1]
    v = a * a / wt[:-2] + b * b / wt[2:] + 1.0 / wt[1:-1]
    return float(np.mean(e * e / v))


def _local_derivatives(
    sample: SortedSample, points: np.ndarray, g: float, order: int, nus: tuple[int, ...]
) -> list[np.ndarray]:
    """``m^(nu)`` at ``points`` for each ``nu`` by one gaussian local polynomial of ``order``, bandwidth ``g``.

    Built on the core's moment sums; the local systems are solved after
    scaling to unit diagonal. NaN where the system is numerically singular.
    """
    pilot = LocalPolynomial(sample, KERNELS["gaussian"], 1, g)
    mom = pilot.moments(points, sample.values(), 2 * order)
    idx = np.arange(order + 1)
    smat = mom[:, 0, :][:, idx[:, None] + idx[None, :]]
    rhs = mom[:, 1, : order + 1]
    diag = np.einsum("mii->mi", smat)
    ok = np.all(diag > 0, axis=1)
    scale = np.sqrt(np.where(ok[:, None], diag, 1.0))
    unit = smat / (scale[:, :, None] * scale[:, None, :])
    ok &= np.abs(np.linalg.det(unit)) > 1e-12
    beta = np.full((points.size, order + 1), np.nan)
    if ok.any():
        beta[ok] = np.linalg.solve(unit[ok], (rhs[ok] / scale[ok])[..., None])[..., 0] / scale[ok]
    return [math.factorial(nu) * beta[:, nu] / g**nu for nu in nus]


def _pilot_bandwidth(q: int, theta_mix: float, sigma2: float, region: float, n: int, fallback: float) -> float:
    """AMSE bandwidth for ``theta_qq = n^-1 sum (m^(q)_g(X_i))^2`` with a gaussian local polynomial of order ``q + 1``.

    The leading bias ``2 q! / (q+2)! g^2 B theta_{q,q+2}`` and the variance
    term ``q!^2 R(K*_q) sigma^2 |I| / (n g^(2q+1))`` cancel at
    ``g^(2q+3) = q! (q+2)! R(K*_q) sigma^2 |I| / (2 B |theta_{q,q+2}| n)``
    (RSW 1995, Section 3, for ``q = 2``).
    """
    rough, bias = _equivalent_kernel("gaussian", q + 1, q)
    const = math.factorial(q) * math.factorial(q + 2) * rough / (2.0 * bias)
    if not (math.isfinite(theta_mix) and theta_mix != 0 and sigma2 > 0):
        return fallback
    return float((const * sigma2 * region / (abs(theta_mix) * n)) ** (1.0 / (2 * q + 3)))


def plugin_bandwidth(sample: SortedSample, kernel: Kernel, degree: int) -> tuple[float, Callable[[np.ndarray], np.ndarray], dict[str, float]]:
    r"""Direct plug-in bandwidth (Ruppert, Sheather & Wand 1995), generalised by the equivalent kernel.

    For a local polynomial of odd order ``P`` the interior AMISE with weight
    function 1 on a region ``I`` is (Fan & Gijbels 1996, Thm 3.1)
    ``h^(2P+2) B^2 theta / ((P+1)!)^2 + R(K*) sigma^2 |I| / (n h)`` with
    ``theta = int_I (m^(P+1))^2 f``, minimised by
    ``h^(2P+3) = ((P+1)!)^2 R(K*) sigma^2 |I| / (2 (P+1) B^2 theta n)``; for
    ``P = 1`` this is RSW's ``[R(K) sigma^2 |I| / (mu2^2 theta22 n)]^(1/5)``.

    * degree 1: ``P = 1``, the published target.
    * degree 0 (Nadaraya-Watson): the degree-1 value. Nadaraya-Watson has the
      same interior variance, but its bias adds ``m' f' / f`` (design) and a
      boundary term that the formula ignores: treat it as a starting point.
    * degree 2: ``P = 3``. In the interior the local quadratic and local cubic
      fits share the equivalent kernel; the quadratic's extra design-bias term
      vanishes for a locally uniform design, which the formula assumes. Needs
      ``theta44``, the integral of the squared fourth derivative.

    Steps, with ``q = P + 1``:

    1. ``sigma^2`` by the difference estimator of Gasser, Sroka &
       Jennen-Steinmetz (1986), used in every step (RSW use blocked-polynomial
       and local linear estimates; the difference estimator does not depend on
       how well a polynomial describes the curve).
    2. ``theta_{q,q+2} = n^-1 sum m^(q) m^(q+2)``. Degree 0 and 1: a *second
       stage* (Wand & Jones 1995, Section 3.6): a blocked polynomial of degree
       6 (blocks by Mallows' Cp, as in RSW Section 4) gives ``theta_46``, which
       sets the pilot bandwidth (below, ``q = 4``) of a gaussian local quintic
       fit whose second and fourth derivatives give ``theta_24``. With RSW's
       single stage (``theta_24`` straight from a blocked quartic) the pilot
       fails on spatially varying curves (the Doppler function: plug-in
       bandwidth 4x too large); the extra stage damps the dependence on the
       polynomial pilot to the power ``1/11``. Degree 2: a single stage,
       ``theta_46`` from the blocked sextic.
    3. Pilot bandwidth ``g`` for ``theta_qq`` (:func:`_pilot_bandwidth`), and
       ``theta_qq = n^-1 sum_I (m^(q)_g(X_i))^2`` from a gaussian local
       polynomial of order ``q + 1`` at up to 10000 evenly ranked data points.
    4. The formula above.

    ``I`` is the central 90% of the x range (the weight function; it keeps the
    erratic boundary derivative estimates out). Weights are rescaled to mean 1
    and used as precisions; the variance term assumes they do not vary
    systematically with ``x``.
    """
    P = 1 if degree <= 1 else 3
    q = P + 1
    xs, yc = sample.xs, sample.yc
    n = sample.n_used
    wt = sample.ws * (n / float(np.sum(sample.ws)))
    span = float(xs[-1] - xs[0])
    a_reg, b_reg = xs[0] + PLUGIN_TRIM * span, xs[-1] - PLUGIN_TRIM * span
    region = b_reg - a_reg
    inside = (xs >= a_reg) & (xs <= b_reg)
    frac = float(np.count_nonzero(inside)) / n
    step = max(1, n // 10000)
    pts = xs[::step]
    pts = pts[(pts >= a_reg) & (pts <= b_reg)]
    distinct = np.unique(xs)

    def floor(order: int) -> float:
        """Pilot bandwidth below which a typical window has too few distinct x for a fit of ``order``.

        A gaussian window reaches about 2.5 bandwidths; points where the local
        system is still singular are left out of the averages.
        """
        k = min(order + 1, distinct.size)
        return float(np.median(knn_distances(distinct, k))) / 2.5

    def mean_inside(values: np.ndarray) -> float:
        return float(np.nanmean(values)) * frac if np.isfinite(values).any() else math.nan

    sigma2 = _difference_variance(xs, yc, wt)
    _, theta46, blocks = _blocked_polynomial(xs, yc, wt, 4, inside)
    g4 = min(max(_pilot_bandwidth(4, theta46, sigma2, region, n, span / 4.0), floor(5)), span)
    pilot: dict[str, float] = {"noise_variance": sigma2, "pilot_blocks": float(blocks), "order_used": float(P)}
    if q == 2:
        d2, d4 = _local_derivatives(sample, pts, g4, 5, (2, 4))
        theta_mix = mean_inside(d2 * d4)
        pilot.update({"stage1_bandwidth": g4, "theta24": theta_mix})
        g = min(max(_pilot_bandwidth(2, theta_mix, sigma2, region, n, span / 4.0), floor(3)), span)
        (dq,) = _local_derivatives(sample, pts, g, 3, (2,))
    else:
        pilot["theta46"] = theta46
        g = g4
        (dq,) = _local_derivatives(sample, pts, g, 5, (4,))
    theta = mean_inside(dq * dq)
    pilot.update({"pilot_bandwidth": g, "curvature": theta})
    rough, bias = _equivalent_kernel(kernel.name, P, 0)
    fact = math.factorial(P + 1)
    if theta > 0 and sigma2 > 0 and math.isfinite(theta):
        h = (fact**2 * rough * sigma2 * region / (2.0 * (P + 1) * bias**2 * theta * n)) ** (1.0 / (2 * P + 3))
    else:
        h = math.inf

    def amise(hh: np.ndarray) -> np.ndarray:
        hh = np.asarray(hh, dtype=float)
        return (hh ** (2 * P + 2) * bias**2 * theta / fact**2) + rough * sigma2 / (n * hh)

    return float(h), amise, pilot
