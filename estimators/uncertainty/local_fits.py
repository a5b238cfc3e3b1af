"""Local fits of any degree at sorted points, their equivalent-kernel rows and variances.

Method notes: ``docs/methods.md`` (uncertainty).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..local_poly import LocalPolynomial
from ..sums import window_bounds

_SINGULAR = 1e-11  # relative determinant below which a local fit drops one degree (as in local_poly)


@dataclass
class LocalFit:
    """Degree-``degree`` local fits at sorted points: coefficients, ``S^-1`` and degree used."""

    t: np.ndarray
    beta: np.ndarray  # (m, degree + 1), bandwidth units, NaN-padded
    inv: np.ndarray  # (m, degree + 1, degree + 1), zero-padded
    degree_used: np.ndarray  # (m,), -1 where the window is empty
    degree: int


def hankel(mom: np.ndarray, d: int) -> np.ndarray:
    idx = np.arange(d + 1)
    return mom[:, idx[:, None] + idx[None, :]]


def local_fit(s: LocalPolynomial, t: np.ndarray, degree: int) -> LocalFit:
    """Local polynomial fits of ``degree`` (any, not only the smoother's) at sorted ``t``.

    Follows the degree rule of :func:`estimators.fit`: at most (distinct x in
    the window - 1), lowered while the relative determinant of the local system
    is below ``1e-11``.
    """
    if degree == s.degree:
        sol = s.solve(t)
        return LocalFit(t, sol.beta, sol.inv, sol.degree_used, degree)
    sample = s.sample
    mom = s.moments(t, sample.values(), 2 * degree)
    smom, tmom = mom[:, 0, :], mom[:, 1, : degree + 1]
    lo, hi = window_bounds(sample.xs, t, s.kernel_spec, s.bandwidth)
    m = t.size
    deg = np.full(m, -1, dtype=np.int64)
    has = (hi > lo) & (smom[:, 0] > 0)
    prefix = sample.distinct_prefix
    deg[has] = np.minimum(prefix[hi[has]] - prefix[lo[has] + 1], degree)
    beta = np.full((m, degree + 1), np.nan)
    inv = np.zeros((m, degree + 1, degree + 1))
    for d in range(degree, -1, -1):
        at = np.flatnonzero(deg == d)
        if at.size == 0:
            continue
        mat = hankel(smom[at], d)
        if d > 0:
            diag = np.prod(np.diagonal(mat, axis1=1, axis2=2), axis=1)
            with np.errstate(divide="ignore", invalid="ignore"):
                rel = np.linalg.det(mat) / diag
            weak = ~(np.abs(rel) > _SINGULAR)
            if weak.any():
                deg[at[weak]] = d - 1
                at, mat = at[~weak], mat[~weak]
        if at.size == 0:
            continue
        iv = np.linalg.inv(mat)
        inv[np.ix_(at, np.arange(d + 1), np.arange(d + 1))] = iv
        beta[np.ix_(at, np.arange(d + 1))] = np.einsum("mij,mj->mi", iv, tmom[at, : d + 1])
    return LocalFit(t, beta, inv, deg, degree)


def coefficient_row(fit: LocalFit, nu: int, h: float) -> np.ndarray:
    """``a = S^-1[nu, :] / h^nu``: ``l_j(t) = w_j K(u_j) sum_k a_k u_j^k`` estimates the ``nu``-th derivative."""
    a = fit.inv[:, nu, :] / h**nu
    a[fit.degree_used < nu] = np.nan
    return a


def variance(s: LocalPolynomial, t: np.ndarray, a: np.ndarray, column: np.ndarray) -> np.ndarray:
    """``sum_j l_j(t)^2 c_j`` for ``column = w_j^2 c_j`` (sorted sources) via squared-kernel moments."""
    d = a.shape[1] - 1
    q = s.moments(t, column, 2 * d, power=2)[:, 0, :]
    out = np.einsum("mi,mij,mj->m", a, hankel(q, d), a)
    clipped: np.ndarray = np.maximum(out, 0.0)
    return clipped


def centre_degree(p: int) -> int:
    """Degree of the bias-corrected fit: ``p + 1`` for odd ``p``, ``p + 2`` for even ``p``."""
    return p + 1 if p % 2 == 1 else p + 2


def sort_points(t: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    perm = np.argsort(t, kind="stable")
    return t[perm], perm


def unsort(values: np.ndarray, perm: np.ndarray) -> np.ndarray:
    out = np.empty_like(values)
    out[perm] = values
    return out
