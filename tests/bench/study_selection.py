"""Monte Carlo study: how close does each selector come to the best bandwidth?

For every replication the data come from a known curve ``m`` plus gaussian
noise, ``n = 500``. A local linear fit (the service default) is judged by the
average squared error at the design points,
``ASE(h) = n^-1 sum_i (mhat_h(x_i) - m(x_i))^2``, computed by the direct dense
weighted least-squares formula (independent of the fast sums and of the
selection code). ``h_best`` minimises ASE over a fine geometric grid of
:data:`FINE` bandwidths from the default smallest candidate (half of it for the
gaussian kernel, whose fits stay defined below it) to half the x range; each selector is scored by ``ASE(h_selected) / ASE(h_best)`` (1 is
perfect). The table gives the median and quartiles of that ratio.

Test curves:

* ``sine``: ``m(x) = sin(2 pi x)``, ``x ~ U(0, 1)``, noise sd 0.3.
* ``doppler``: the Doppler function of Donoho & Johnstone (1994),
  ``sqrt(x (1 - x)) sin(2 pi 1.05 / (x + 0.05))`` on the regular design
  ``x_i = (i - 1/2) / n``, scaled to standard deviation 7 with noise sd 1
  (their signal-to-noise ratio 7).
* ``peak``: a narrow peak on a line, ``m(x) = x + 2 exp(-16 x^2)``,
  ``x ~ U(-2, 2)``, noise sd 0.4, in the style of the test curves of Ruppert,
  Sheather & Wand (1995) (form and noise level from memory).

The noise is independent, so every selector runs with ``noise="independent"``
(the selectors themselves are compared; how often ``noise="auto"`` would treat
such data as correlated is measured in ``study_correlated``'s notes).

Targets (medians): gcv and plugin <= 1.25, loocv and aicc <= 1.4.

References: Donoho, D. L. and Johnstone, I. M. (1994). Ideal spatial adaptation
by wavelet shrinkage. *Biometrika* 81, 425-455. Ruppert, D., Sheather, S. J.
and Wand, M. P. (1995). An effective bandwidth selector for local least
squares regression. *J. Amer. Statist. Assoc.* 90, 1257-1270.

Run: ``python -m tests.bench.study_selection [--replications 100] [--kernel gaussian]``.
"""

from __future__ import annotations

import argparse
import math
import time
from collections.abc import Callable, Sequence
from dataclasses import dataclass

import numpy as np

from estimators import KERNELS, select_bandwidth
from estimators.bandwidth import well_posed_minimum
from estimators.sample import validate_sample
from estimators.sums import GAUSSIAN_CUTOFF

from .machine import describe

N = 500
FINE = 120
SELECTORS = ("gcv", "plugin", "loocv", "aicc", "rule_of_thumb")
TARGETS = {"gcv": 1.25, "plugin": 1.25, "loocv": 1.4, "aicc": 1.4}


@dataclass(frozen=True)
class Curve:
    name: str
    design: Callable[[np.random.Generator, int], np.ndarray]
    truth: Callable[[np.ndarray], np.ndarray]
    noise_sd: float
    description: str


def _doppler_raw(x: np.ndarray) -> np.ndarray:
    return np.sqrt(x * (1.0 - x)) * np.sin(2.0 * math.pi * 1.05 / (x + 0.05))


_DOPPLER_SCALE = 7.0 / float(np.std(_doppler_raw((np.arange(N) + 0.5) / N)))

CURVES = {
    "sine": Curve(
        "sine", lambda rng, n: np.sort(rng.uniform(0.0, 1.0, n)), lambda x: np.sin(2.0 * math.pi * x), 0.3,
        "sin(2 pi x), x ~ U(0,1), sd 0.3",
    ),
    "doppler": Curve(
        "doppler", lambda rng, n: (np.arange(n) + 0.5) / n, lambda x: _DOPPLER_SCALE * _doppler_raw(x), 1.0,
        "Doppler (Donoho & Johnstone 1994), regular design, SNR 7",
    ),
    "peak": Curve(
        "peak", lambda rng, n: np.sort(rng.uniform(-2.0, 2.0, n)), lambda x: x + 2.0 * np.exp(-16.0 * x * x), 0.4,
        "x + 2 exp(-16 x^2), x ~ U(-2,2), sd 0.4",
    ),
}


def dense_fits(x: np.ndarray, y: np.ndarray, kernel: str, bandwidths: np.ndarray, degree: int = 1) -> np.ndarray:
    """Local polynomial fits at the data points by the direct weighted least-squares formula, one row per bandwidth."""
    kern = KERNELS[kernel]
    diff = x[None, :] - x[:, None]
    out = np.empty((bandwidths.size, x.size))
    for r, h in enumerate(bandwidths):
        u = diff / h
        w = kern(u)
        if not math.isfinite(kern.support):
            w = np.where(np.abs(u) <= GAUSSIAN_CUTOFF, w, 0.0)
        cols = [w]
        for _ in range(2 * degree):
            cols.append(cols[-1] * u)
        mom = np.stack([c.sum(axis=1) for c in cols], axis=1)
        rhs = np.stack([cols[j] @ y for j in range(degree + 1)], axis=1)
        mat = np.stack([mom[:, i : i + degree + 1] for i in range(degree + 1)], axis=1)
        out[r] = np.linalg.solve(mat, rhs[..., None])[:, 0, 0]
    return out


def ase(x: np.ndarray, y: np.ndarray, m: np.ndarray, kernel: str, bandwidths: np.ndarray) -> np.ndarray:
    return np.mean((dense_fits(x, y, kernel, np.asarray(bandwidths, dtype=float)) - m[None, :]) ** 2, axis=1)


def replicate(
    curve: Curve, seed: int, kernel: str, selectors: Sequence[str] = SELECTORS, fine_count: int = FINE
) -> dict[str, float]:
    """One replication: ``ASE(h_selected) / ASE(h_best)`` per selector.

    Also ``edge`` (1 if ``h_best`` is on the edge of the fine grid) and
    ``"<selector>:<caution code>"`` (1 if the selection raised that caution).
    """
    rng = np.random.default_rng(seed)
    x = curve.design(rng, N)
    m = curve.truth(x)
    y = m + rng.normal(0.0, curve.noise_sd, x.size)
    lo = well_posed_minimum(validate_sample(x, y), KERNELS[kernel], 1)
    if not math.isfinite(KERNELS[kernel].support):
        lo *= 0.5  # the gaussian fit stays defined below the default range; compact windows would empty
    fine = np.geomspace(lo, 0.5 * (x[-1] - x[0]), fine_count)
    curve_ase = ase(x, y, m, kernel, fine)
    ib = int(np.argmin(curve_ase))
    best = float(curve_ase[ib])
    out: dict[str, float] = {"edge": float(ib in (0, fine_count - 1))}
    chosen = {}
    for s in selectors:
        sel = select_bandwidth(x, y, kernel=kernel, degree=1, selector=s, noise="independent")
        chosen[s] = sel.chosen
        for code in {c.code for c in sel.warnings}:
            out[f"{s}:{code}"] = 1.0
    values = ase(x, y, m, kernel, np.array(list(chosen.values())))
    for (s, _), v in zip(chosen.items(), values, strict=True):
        out[s] = float(v) / best
    return out


def run(replications: int, kernel: str, curves: Sequence[str] = tuple(CURVES), seed0: int = 20260101,
        selectors: Sequence[str] = SELECTORS) -> dict[str, dict[str, np.ndarray]]:
    """Ratios per curve and selector: ``{curve: {selector: array of replications}}``."""
    results: dict[str, dict[str, np.ndarray]] = {}
    for ci, name in enumerate(curves):
        rows = [replicate(CURVES[name], seed0 + 1000 * ci + r, kernel, selectors) for r in range(replications)]
        keys = sorted({k for row in rows for k in row})
        results[name] = {k: np.array([row.get(k, 0.0) for row in rows]) for k in keys}
    return results


def table(results: dict[str, dict[str, np.ndarray]], selectors: Sequence[str] = SELECTORS) -> str:
    head = "| curve | " + " | ".join(selectors) + " |"
    sep = "|---|" + "---|" * len(selectors)
    lines = [head, sep]
    for name, res in results.items():
        cells = []
        for s in selectors:
            q1, med, q3 = np.quantile(res[s], [0.25, 0.5, 0.75])
            target = TARGETS.get(s)
            mark = "" if target is None else (" ok" if med <= target else " MISS")
            cells.append(f"{med:.3f} ({q1:.2f}-{q3:.2f}){mark}")
        lines.append(f"| {name} | " + " | ".join(cells) + " |")
    pooled = []
    for s in selectors:
        values = np.concatenate([res[s] for res in results.values()])
        q1, med, q3 = np.quantile(values, [0.25, 0.5, 0.75])
        pooled.append(f"{med:.3f} ({q1:.2f}-{q3:.2f})")
    lines.append("| all curves | " + " | ".join(pooled) + " |")
    return "\n".join(lines)


def main(argv: Sequence[str] | None = None) -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--replications", type=int, default=100)
    parser.add_argument("--kernel", default="gaussian", choices=sorted(KERNELS))
    args = parser.parse_args(list(argv) if argv is not None else None)
    t0 = time.perf_counter()
    results = run(args.replications, args.kernel)
    elapsed = time.perf_counter() - t0
    print("## Bandwidth selection study: median ASE(h_selected) / ASE(h_best) (quartiles)\n")
    print(f"n = {N}, local linear, {args.kernel} kernel, {args.replications} replications per curve, "
          f"h_best over {FINE} bandwidths; targets: gcv, plugin <= 1.25; loocv, aicc <= 1.4 "
          "(rule_of_thumb has none: it ignores y)\n")
    print(table(results))
    print()
    for name, res in results.items():
        flagged = ", ".join(
            f"{k} {int(v.sum())}" for k, v in res.items() if ":" in k and v.sum() > 0 and not k.startswith("rule_of_thumb")
        )
        print(f"- {name}: {CURVES[name].description}; h_best on the edge of the fine grid in "
              f"{int(res['edge'].sum())} of {res['edge'].size} replications; cautions (selector:code count): "
              f"{flagged or 'none'}")
    print(f"\nMachine: {describe()}; {elapsed:.0f} s")


if __name__ == "__main__":
    main()
