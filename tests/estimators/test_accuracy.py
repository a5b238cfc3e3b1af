"""The fast engines against the direct weighted least-squares formula.

Tolerance: max |difference| <= 1e-9 x range(y) for degrees 0 and 1, 1e-7 for
degree 2, for every kernel, on data shapes that break naive implementations.
"""

from __future__ import annotations

import zlib

import numpy as np
import pytest

from estimators import KERNELS, fit

from .dense_reference import dense_local_fit
from .reference_sums import compact_moments

RNG = np.random.default_rng(20261202)
N = 300


def _case(name: str) -> tuple[np.ndarray, np.ndarray, np.ndarray | None, float]:
    rng = np.random.default_rng(zlib.crc32(name.encode()))
    if name == "unsorted_uniform":
        x = rng.uniform(0, 10, N)
        return x, np.sin(x) + rng.normal(0, 0.2, N), None, 0.6
    if name == "weights":
        x = rng.uniform(0, 10, N)
        return x, np.sin(x) + rng.normal(0, 0.2, N), rng.uniform(0, 3, N), 0.6
    if name == "heavy_ties":
        x = np.round(rng.uniform(0, 10, N))
        return x, np.cos(x) + rng.normal(0, 0.2, N), None, 1.7
    if name == "two_clusters_gap":
        x = np.concatenate([rng.uniform(0, 3, N // 2), rng.uniform(7, 10, N // 2)])
        return x, np.sin(x) + rng.normal(0, 0.2, N), None, 0.5
    if name == "epoch_ms_6h":
        x = 1.7e12 + rng.uniform(0, 30 * 86_400_000, N)
        return x, np.sin(x / 86_400_000) + rng.normal(0, 0.2, N), None, 6 * 3_600_000.0
    if name == "span_1e5_bandwidths":
        # clumps of points (a few bandwidths wide) scattered over 1e5 bandwidths
        centres = rng.uniform(0, 1e5, 60)
        x = (centres[:, None] + rng.uniform(-2.5, 2.5, (60, 8))).ravel()
        return x, np.sin(x) + rng.normal(0, 0.2, x.size), None, 1.0
    if name == "y_offset_1e6":
        x = rng.uniform(0, 10, N)
        return x, 1e6 + np.sin(x) + rng.normal(0, 0.2, N), None, 0.6
    raise KeyError(name)


CASES = [
    "unsorted_uniform",
    "weights",
    "heavy_ties",
    "two_clusters_gap",
    "epoch_ms_6h",
    "span_1e5_bandwidths",
    "y_offset_1e6",
]


@pytest.mark.parametrize("case", CASES)
@pytest.mark.parametrize("kernel", list(KERNELS))
@pytest.mark.parametrize("degree", [0, 1, 2])
def test_exact_engine_matches_dense_formula(case: str, kernel: str, degree: int) -> None:
    x, y, w, h = _case(case)
    ww = np.ones_like(x) if w is None else w
    t = np.concatenate([x[:120], np.linspace(x.min() - 0.93 * h, x.max() + 0.93 * h, 40)])
    s = fit(x, y, kernel=kernel, degree=degree, bandwidth=h, weights=w, engine="exact")
    sol = s.solve(t)
    got = s.predict(t)
    ref, ref_slope, used, conditioning = dense_local_fit(x, y, ww, t, KERNELS[kernel], h, degree)
    same_degree = sol.degree_used == used
    if kernel == "gaussian" and case == "span_1e5_bandwidths":
        # windows whose only second point sits ~10 bandwidths away carry weights ~1e-22:
        # whether that is "singular" is decided by rounding in both codes
        assert same_degree.mean() > 0.98
    else:
        assert same_degree.all(), np.flatnonzero(~same_degree)
    assert np.array_equal(np.isnan(got[same_degree]), np.isnan(ref[same_degree]))
    tol = (1e-9 if degree < 2 else 1e-7) * np.ptp(y)
    # with data on one side only (beyond the range, at the edge of a gap) the local
    # systems are ill-conditioned: there only definedness is compared (above), not digits
    xs = np.sort(x)
    left = np.searchsorted(xs, t - h, "left") < np.searchsorted(xs, t, "left")
    right = np.searchsorted(xs, t, "right") < np.searchsorted(xs, t + h, "right")
    inside = left & right
    ok = same_degree & np.isfinite(ref) & inside
    assert ok.sum() > 0
    assert np.max(np.abs(got[ok] - ref[ok])) <= tol
    if degree >= 1:
        sl = s.slope(t)
        # slopes where the window is one point plus others at ~1e-20 relative weight (spread
        # of u below 1e-6) depend on those tiny weights and are not comparable digit by digit
        okd = ok & np.isfinite(ref_slope) & (conditioning > 1e-6)
        scale = np.ptp(y) / h
        assert np.max(np.abs(sl[okd] - ref_slope[okd])) <= 1e3 * tol / np.ptp(y) * scale


@pytest.mark.parametrize("kernel", list(KERNELS))
def test_numpy_and_compiled_paths_agree(kernel: str) -> None:
    """The vectorised numpy sums (the fallback) and the compiled sweep give the same moments."""
    from estimators import sums

    rng = np.random.default_rng(7)
    x = np.sort(1.7e12 + rng.uniform(0, 5e8, 2000))
    q = np.stack([rng.uniform(0.5, 2, 2000), rng.normal(size=2000)], axis=1)
    t = np.sort(np.concatenate([x, [x[0] - 1e7, x[-1] + 1e9]]))  # several query blocks of the sweep
    k = KERNELS[kernel]
    if k.shape is None:
        pytest.skip("the gaussian has a single (fast Gauss transform) exact path")
    fast = sums.moment_sums(x, q, t, k, 3e7, 4)
    ref = compact_moments(x, q, t, k, k.shape, 3e7, 4)
    assert np.max(np.abs(fast - ref)) <= 1e-11 * np.max(np.abs(ref))


@pytest.mark.parametrize("kernel", [k for k, spec in KERNELS.items() if spec.shape is not None])
@pytest.mark.parametrize("degree", [0, 1, 2])
def test_compiled_fit_across_query_blocks_matches_dense_formula(kernel: str, degree: int) -> None:
    """The fused sweep finishes queries in blocks; empty windows and both data clusters span several blocks."""
    from estimators._compiled import _QUERY_BLOCK

    rng = np.random.default_rng(11)
    x = np.concatenate([rng.uniform(0, 3, 700), rng.uniform(7, 10, 700)])
    y = np.cos(x) + rng.normal(0, 0.2, x.size)
    h = 0.4
    t = np.sort(np.concatenate([x, np.linspace(-0.5, 10.5, 900)]))
    assert t.size > 3 * _QUERY_BLOCK
    s = fit(x, y, kernel=kernel, degree=degree, bandwidth=h, engine="exact")
    got = s.predict(t)
    ref, _, used, _ = dense_local_fit(x, y, np.ones_like(x), t, KERNELS[kernel], h, degree)
    assert np.array_equal(s.solve(t).degree_used, used)
    assert np.array_equal(np.isnan(got), np.isnan(ref))
    assert np.isnan(ref).sum() > 100  # the gap gives empty windows in more than one block
    xs = np.sort(x)
    inside = (np.searchsorted(xs, t - h, "left") < np.searchsorted(xs, t, "left")) & (
        np.searchsorted(xs, t, "right") < np.searchsorted(xs, t + h, "right")
    )
    tol = (1e-9 if degree < 2 else 1e-7) * np.ptp(y)
    assert np.max(np.abs(got[inside] - ref[inside])) <= tol
    fitted = s.fitted()  # the data points themselves: 1400 queries, three blocks
    ref_at_data = dense_local_fit(x, y, np.ones_like(x), x, KERNELS[kernel], h, degree)[0]
    xin = (np.searchsorted(xs, x - h, "left") < np.searchsorted(xs, x, "left")) & (
        np.searchsorted(xs, x, "right") < np.searchsorted(xs, x + h, "right")
    )
    assert np.max(np.abs(fitted[xin] - ref_at_data[xin])) <= tol


@pytest.mark.parametrize("kernel", ["gaussian", "epanechnikov", "tricube"])
def test_binned_engine_error_is_small(kernel: str) -> None:
    """Binned path: measured error against the exact path (stated in estimators.sums)."""
    rng = np.random.default_rng(3)
    x = rng.uniform(0, 100, 20_000)
    y = np.sin(x / 3) + rng.normal(0, 0.3, x.size)
    t = np.linspace(1, 99, 500)
    exact = fit(x, y, kernel=kernel, bandwidth=1.0, engine="exact").predict(t)
    binned = fit(x, y, kernel=kernel, bandwidth=1.0, engine="binned").predict(t)
    bound = {"gaussian": 1e-6, "epanechnikov": 1e-4, "tricube": 1e-4}[kernel]
    assert np.max(np.abs(binned - exact)) <= bound * np.ptp(y)


@pytest.mark.parametrize("cache_tiles", [16384, 8])
def test_gaussian_queries_sharing_translated_tiles_match_dense_formula(cache_tiles: int, monkeypatch: pytest.MonkeyPatch) -> None:
    # One smoother answers several sets of points; the fast Gauss transform keeps the
    # local expansion of every tile it has translated and reuses it for later points.
    # Each answer must equal the direct formula (Fan & Gijbels 1996, eq. 3.4) whether a
    # tile was cached, new, outside the data, or the cache was full (cache_tiles=8).
    from estimators import sums

    monkeypatch.setattr(sums, "_LOCAL_CACHE_TILES", cache_tiles)
    rng = np.random.default_rng(7)
    x = rng.uniform(0, 10, N)
    y = np.sin(x) + rng.normal(0, 0.2, N)
    h = 0.4
    s = fit(x, y, kernel="gaussian", bandwidth=h, engine="exact", degree=1)
    w = np.ones(N)
    y_range = float(np.ptp(y))
    for points in (np.linspace(2.0, 6.0, 37), np.linspace(-1.5, 11.5, 53), np.sort(rng.uniform(0, 10, 40))):
        ours = s.predict(points)
        reference = dense_local_fit(x, y, w, points, KERNELS["gaussian"], h, 1)[0]
        assert np.max(np.abs(ours - reference)) <= 1e-9 * y_range
    fitted_reference = dense_local_fit(x, y, w, x, KERNELS["gaussian"], h, 1)[0]
    assert np.max(np.abs(s.fitted() - fitted_reference)) <= 1e-9 * y_range


def _dense_smoother_matrix(x: np.ndarray, w: np.ndarray, kernel: str, h: float, degree: int) -> np.ndarray:
    """Row k maps y to the local polynomial estimate at x_k: e1' (X'KX)^-1 X'K (Fan & Gijbels 1996, eq. 3.4)."""
    k = KERNELS[kernel]
    rows = np.empty((x.size, x.size))
    for i, t in enumerate(x):
        u = (x - t) / h
        kw = k(u) * w
        design = np.vander(u, degree + 1, increasing=True)
        rows[i] = np.linalg.solve(design.T @ (kw[:, None] * design), design.T * kw)[0]
    return rows


@pytest.mark.parametrize("kernel", ["epanechnikov", "gaussian"])
@pytest.mark.parametrize("degree", [1, 2])
def test_degrees_of_freedom_and_residual_scale_match_the_dense_smoother_matrix(kernel: str, degree: int) -> None:
    # sigma^2 = sum w r^2 / (n - 2 tr L + tr(L' W L W^-1)) (Hastie & Tibshirani 1990, Section 3.4),
    # every trace taken from the explicit n-by-n smoother matrix.
    rng = np.random.default_rng(11)
    x = rng.uniform(0, 10, 200)
    y = np.sin(x) + rng.normal(0, 0.3, x.size)
    w = rng.uniform(0.5, 2.0, x.size)
    h = 1.2
    s = fit(x, y, kernel=kernel, bandwidth=h, degree=degree, weights=w, engine="exact")
    big_l = _dense_smoother_matrix(x, w, kernel, h, degree)
    tr_l = np.trace(big_l)
    tr_var = float(np.sum(w[:, None] * big_l**2 / w[None, :]))
    resid = y - big_l @ y
    sigma = np.sqrt(np.sum(w * resid**2) / (x.size - 2 * tr_l + tr_var))
    assert s.effective_df == pytest.approx(tr_l, rel=1e-9)
    assert s.variance_df == pytest.approx(tr_var, rel=1e-9)
    assert s.residual_scale == pytest.approx(sigma, rel=1e-9)


@pytest.mark.parametrize("kernel", ["epanechnikov", "gaussian"])
@pytest.mark.parametrize("weights", [None, [0.0, 0.0, 1.0, 0.0, 2.0]], ids=["two points", "two weighted of five"])
def test_an_interpolating_fit_leaves_the_residual_scale_undefined(kernel: str, weights: list[float] | None) -> None:
    # A local linear fit through two distinct points is the line through them: L = I, so
    # n - 2 tr L + tr(L' W L W^-1) = 2 - 4 + 2 = 0 residual degrees of freedom (Hastie &
    # Tibshirani 1990, Section 3.4) and the noise scale cannot be estimated; rounding of the
    # trace terms must not turn 0 / 0 into a number.
    x = np.array([1.0, 2.0]) if weights is None else np.array([1.0, 2.0, 3.0, 4.0, 5.0])
    y = np.array([1.0, 2.0]) if weights is None else np.array([1.0, 2.0, 1.0, 2.0, 1.5])
    s = fit(x, y, kernel=kernel, bandwidth=3.0, degree=1, weights=weights)
    assert s.effective_df == pytest.approx(2.0, abs=1e-9)
    assert np.isnan(s.residual_scale)


@pytest.mark.parametrize("degree", [0, 1, 2])
@pytest.mark.parametrize(("seed", "span", "h"), [(11, 10.0, 1.2), (3, 10.0, 0.4), (5, 50.0, 2.0)])
def test_gaussian_variance_term_with_the_shorter_data_point_transform_stays_near_rounding(seed: int, span: float, h: float, degree: int) -> None:
    # tr(L' W L W^-1) from the explicit smoother matrix (Hastie & Tibshirani 1990, Section 3.4). The
    # squared kernel's sums at the data points use fewer transform terms (estimators.sums.DATA_POINT_TERMS);
    # measured worst case over these designs 4e-13. Two terms fewer at any degree exceed the bound.
    rng = np.random.default_rng(seed)
    x = rng.uniform(0.0, span, 200)
    y = np.sin(x) + rng.normal(0, 0.3, x.size)
    w = rng.uniform(0.5, 2.0, x.size)
    s = fit(x, y, kernel="gaussian", bandwidth=h, degree=degree, weights=w, engine="exact")
    big_l = _dense_smoother_matrix(x, w, "gaussian", h, degree)
    tr_var = float(np.sum(w[:, None] * big_l**2 / w[None, :]))
    assert abs(s.variance_df - tr_var) <= 2e-12 * tr_var


@pytest.mark.parametrize("cache_tiles", [16384, 8])
def test_gauss_transform_matches_the_direct_hermite_sum_in_any_point_order(cache_tiles: int, monkeypatch: pytest.MonkeyPatch) -> None:
    # d^j/dw^j sum_i q_i exp(-(x_i - t)^2 / 2h^2) in units of h = sum_i q_i He_j(u_i) exp(-u_i^2 / 2),
    # u_i = (x_i - t) / h (probabilists' Hermite polynomials, He_{j+1} = u He_j - j He_{j-1};
    # Abramowitz & Stegun 1964, 22.7.14). Points are given shuffled: the compiled pass must not
    # rely on their order, and must agree with itself whether a tile was cached or not.
    from estimators import sums

    monkeypatch.setattr(sums, "_LOCAL_CACHE_TILES", cache_tiles)
    rng = np.random.default_rng(11)
    x = np.sort(rng.uniform(0.0, 8.0, 300))
    q = np.column_stack([rng.uniform(0.5, 1.5, x.size), rng.normal(size=x.size)])
    h = 0.35
    sources = sums._GaussSources(x, q, h)
    points = rng.permutation(np.concatenate([rng.uniform(-2.0, 10.0, 120), x[::7]]))
    order = 3
    ours = sources.transform(points, np.eye(order + 1))
    u = (x[None, :] - points[:, None]) / h
    he = [np.ones_like(u), u]
    for j in range(1, order):
        he.append(u * he[j] - j * he[j - 1])
    base = np.exp(-0.5 * u * u) * (np.abs(u) <= sums.GAUSSIAN_CUTOFF + 2.0)  # the transform keeps whole tiles in reach
    reference = np.stack([(he[j] * base) @ q for j in range(order + 1)], axis=-1)  # (m, ncol, order + 1)
    scale = np.abs(q).sum(axis=0)[None, :, None]
    assert np.max(np.abs(ours - reference) / scale) <= 1e-12
    again = sources.transform(np.sort(points), np.eye(order + 1))  # every tile now cached
    assert np.max(np.abs(again - ours[np.argsort(points, kind="stable")]) / scale) <= 1e-12


def test_gauss_transform_with_empty_tiles_on_either_side_matches_the_direct_sum() -> None:
    # Tiles at opposite offsets share one translation matrix (the kernel is even); with data in
    # clusters, a target tile has sources on one side only, on both at some distances, or none
    # in its own tile, so every way of pairing them is exercised. Reference: the direct Hermite
    # sum (Abramowitz & Stegun 1964, 22.7.14), as above.
    from estimators import sums

    rng = np.random.default_rng(12)
    x = np.sort(np.concatenate([rng.uniform(0.0, 0.6, 40), rng.uniform(1.9, 2.1, 25), rng.uniform(3.3, 3.4, 5), rng.uniform(5.0, 6.5, 60)]))
    q = np.column_stack([rng.uniform(0.5, 1.5, x.size), rng.normal(size=x.size)])
    h = 0.3
    sources = sums._GaussSources(x, q, h)
    points = np.linspace(-1.0, 7.5, 400)
    ours = sources.transform(points, np.eye(3))
    u = (x[None, :] - points[:, None]) / h
    base = np.exp(-0.5 * u * u) * (np.abs(u) <= sums.GAUSSIAN_CUTOFF + 2.0)
    reference = np.stack([(hermite * base) @ q for hermite in (np.ones_like(u), u, u * u - 1.0)], axis=-1)
    scale = np.abs(q).sum(axis=0)[None, :, None]
    assert np.max(np.abs(ours - reference) / scale) <= 1e-12


def test_gaussian_translation_matrices_mirror_for_opposite_offsets() -> None:
    # The transform applies A_D to the source tiles at +D and -D at once, relying on
    # A_{-D}[k, j] = (-1)^(j+k) A_D[k, j], which holds because exp(-(D+s)^2/2) = exp(-(-D-s)^2/2).
    from estimators import sums

    table = sums._translation_matrices(sums.N_TERMS)
    reach = (table.shape[0] - 1) // 2
    signs = (-1.0) ** np.add.outer(np.arange(sums.N_TERMS), np.arange(sums.N_TERMS))
    for d in range(1, reach + 1):
        plus, minus = table[reach + d], table[reach - d]
        assert np.max(np.abs(minus - signs * plus)) <= 1e-14 * np.max(np.abs(plus))


@pytest.mark.parametrize("offset", range(0, 12))
def test_gaussian_translation_polynomial_matches_the_kernel_and_its_derivatives(offset: int) -> None:
    # Closed form: d^j/ds^j exp(-(D+s)^2/2) = (-1)^j He_j(D+s) exp(-(D+s)^2/2), probabilists' Hermite
    # polynomials (Abramowitz & Stegun 1964, 22.2.15 and 22.7.14) from scipy.special. The polynomial
    # replaces the kernel on |s| <= 1 (one tile width each side); the bounds are a few rounding
    # units, below what a 30-term Taylor series reaches for the second derivative (2e-14 at D = 0).
    from numpy.polynomial import polynomial as P
    from scipy.special import eval_hermitenorm

    from estimators import sums

    coef = sums.economized_kernel(float(offset))
    assert coef.size == sums.N_TERMS
    s = np.linspace(-1.0, 1.0, 2001)
    u = offset + s
    for j, bound in ((0, 1e-15), (1, 2e-15), (2, 1e-14)):
        exact = (-1.0) ** j * eval_hermitenorm(j, u) * np.exp(-0.5 * u * u)
        assert np.max(np.abs(P.polyval(s, P.polyder(coef, j)) - exact)) <= bound


def _polynomial_errors(offset: int, terms: int) -> np.ndarray:
    """Largest error on ``|s| <= 1`` of the economized polynomial and of its derivatives 0-4 (closed form, see above)."""
    from numpy.polynomial import polynomial as P
    from scipy.special import eval_hermitenorm

    from estimators import sums

    coef = sums.economized_kernel(float(offset), terms)
    s = np.linspace(-1.0, 1.0, 2001)
    u = offset + s
    return np.array([
        np.max(np.abs(P.polyval(s, P.polyder(coef, j)) - (-1.0) ** j * eval_hermitenorm(j, u) * np.exp(-0.5 * u * u)))
        for j in range(5)
    ])


@pytest.mark.parametrize(("terms", "reach"), [(24, 11), (18, 11), (24, 16)])
def test_shorter_polynomials_far_from_the_target_are_as_accurate_as_the_full_length_near_it(terms: int, reach: int) -> None:
    # Far tiles get fewer terms; the kernel and its first four derivatives (closed form: Hermite
    # polynomials, Abramowitz & Stegun 1964, 22.2.15) must stay within the worst error the full
    # length makes at any offset, so the transform's error per unit of mass does not grow.
    from estimators import sums

    lengths = sums.offset_terms(terms, reach)
    assert lengths.size == 2 * reach + 1 and np.array_equal(lengths, lengths[::-1])
    assert np.all((lengths >= 1) & (lengths <= terms))
    full = np.array([_polynomial_errors(d, terms) for d in range(reach + 1)])
    worst = full.max(axis=0)
    for d in range(reach + 1):
        short = _polynomial_errors(d, int(lengths[reach + d]))
        assert np.all(short <= 1.5 * worst + 1e-300), (d, short, worst)
    table = sums._translation_matrices(terms, reach)
    jk = np.add.outer(np.arange(terms), np.arange(terms))
    for i, nd in enumerate(lengths):
        assert not np.any(table[i][jk >= nd])  # the compiled loops skip exactly these entries


def _dense_local_linear_weights(x: np.ndarray, t: float, h: float) -> np.ndarray:
    """``l(t) = e_1' (X'WX)^-1 X'W`` for the gaussian local linear fit at ``t``, weights scaled by their maximum."""
    d = x - t
    u = d / h
    k = np.exp(-0.5 * u * u + 0.5 * np.min(u * u))  # a common factor cancels in l(t)
    design = np.column_stack([np.ones_like(d), d])
    return np.linalg.solve(design.T @ (k[:, None] * design), (design * k[:, None]).T)[0]


def test_gaussian_fit_and_standard_error_far_from_the_data_match_the_dense_formula() -> None:
    # Points 6-9.9 bandwidths from the nearest data (inside a gap of 17 bandwidths, and beyond the
    # data): the estimate is l(t)'y and its standard error sigma |l(t)| (Fan & Gijbels 1996,
    # Section 3.2; sigma = the smoother's residual scale), with l(t) from the explicit weighted
    # least-squares solution. The tiny weights there must not leave the sums to rounding.
    rng = np.random.default_rng(21)
    x = np.concatenate([rng.uniform(0.0, 10.0, 100), rng.uniform(27.0, 37.0, 100)])
    y = np.sin(x) + rng.normal(0.0, 0.3, x.size)
    h = 1.0
    s = fit(x, y, kernel="gaussian", bandwidth=h)
    lo, hi = x[x < 20].max(), x[x > 20].min()
    t = np.array([lo + 6.5, lo + 8.5, (lo + hi) / 2, hi - 7.5, x.max() + 6.0, x.max() + 8.0, x.max() + 9.5])
    weights = [_dense_local_linear_weights(x, float(p), h) for p in t]
    estimate = np.array([w @ y for w in weights])
    se = s.residual_scale * np.array([np.sqrt(w @ w) for w in weights])
    np.testing.assert_allclose(s.predict(t), estimate, rtol=1e-7)
    np.testing.assert_allclose(s.standard_error(t), se, rtol=1e-7)
