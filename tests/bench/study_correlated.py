"""Correlated-noise study: bandwidth and bands when the noise of neighbouring readings is correlated.

Data: ``y_i = m(x_i) + 0.3 e_i`` where ``e`` is a stationary AR(1) series in
reading order with coefficient ``phi`` and unit marginal variance
(``e_i = phi e_{i-1} + sqrt(1 - phi^2) eps_i``), so every reading has noise sd
0.3 whatever ``phi``. Time stamps are regular, ``x_i = (i + 1/2) / n``, or
jittered, ``x_i = (i + 1/2 + U(-0.4, 0.4)) / n``.

Truths:

* ``sine``: ``m(t) = sin(2 pi t) + 0.5 t`` (the curve of the issue);
* ``bump``: ``m(t) = 0.5 t + exp(-50 (t - 0.6)^2)`` (a narrow bump on a line).

Every replication calls the public ``estimators.fit(x, y)`` with every
setting at its default (``noise="auto"``, ``bandwidth="auto"``): the noise is
diagnosed (difference-based test, two-sided level 0.01); when it is not found
correlated the bandwidth is GCV's, otherwise modified (leave-(2l+1)-out)
cross-validation scores the same candidates. The oracle is the bandwidth
minimising the average squared error
``ASE(h) = n^-1 sum (mhat_h(x_i) - m(x_i))^2`` over a fine geometric grid
(``estimators.fit`` with fixed bandwidths, local linear, gaussian kernel).

Bands: the smoother's analytic 95 % band (``Smoother.bands``, bias corrected,
scaled for correlated noise when that path was taken); coverage of the truth
at 33 interior points in [0.1, 0.9] (pointwise: share of points;
simultaneous: share of replications covering all 33 with the sup-t band).

Targets (issue 23): median ASE ratio <= 1.3 at phi = 0, <= 1.5 at 0.3 and
0.6, <= 1.8 at 0.9, p90 <= 3; pointwise coverage 0.90-0.985 (>= 0.85 at 0.9).

Run: ``python -m tests.bench.study_correlated [--full] [--replications R]``.
"""

from __future__ import annotations

import argparse
import math
import time
from collections.abc import Sequence
from concurrent.futures import ProcessPoolExecutor

import numpy as np

from estimators import fit
from tests.estimators.noise_series import ar1

from .machine import describe

PHIS = (0.0, 0.3, 0.6, 0.9)
SIZES = (300, 1000, 5000)
DESIGNS = ("regular", "jittered")
TRUTHS = {
    "sine": lambda t: np.sin(2.0 * math.pi * t) + 0.5 * t,
    "bump": lambda t: 0.5 * t + np.exp(-50.0 * (t - 0.6) ** 2),
}
SD = 0.3
FINE = 40
POINTS = np.linspace(0.1, 0.9, 33)
LEVEL = 0.95


def data(truth: str, n: int, phi: float, design: str, seed: int) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    rng = np.random.default_rng(seed)
    i = np.arange(n) + 0.5
    if design == "jittered":
        i = i + rng.uniform(-0.4, 0.4, n)
    x = i / n
    m = TRUTHS[truth](x)
    return x, m + SD * ar1(rng, n, phi), m


def replicate(args: tuple[str, int, float, str, int]) -> dict[str, float]:
    truth, n, phi, design, seed = args
    x, y, m = data(truth, n, phi, design, seed)
    s = fit(x, y)  # every setting at its default: noise auto, bandwidth auto
    assert s.selection is not None
    fine = np.geomspace(0.5 * s.selection.candidates[0], 0.5, FINE)
    ase = np.array([np.mean((fit(x, y, bandwidth=float(b), noise="independent").fitted() - m) ** 2) for b in fine])
    ase_h = float(np.mean((s.fitted() - m) ** 2))
    mt = TRUTHS[truth](POINTS)
    out = {"ratio": ase_h / float(ase.min()), "correlated": float(s.noise == "correlated"), "phi_hat": s.noise_autocorrelation}
    for simultaneous in (False, True):
        b = s.bands(POINTS, level=LEVEL, method="analytic", simultaneous=simultaneous, seed=seed)
        hit = (b.lower <= mt) & (mt <= b.upper)
        out["simultaneous" if simultaneous else "pointwise"] = float(hit.all() if simultaneous else hit.mean())
    return out


def run(replications: int, sizes: Sequence[int], jobs: int, truths: Sequence[str], phis: Sequence[float]) -> list[tuple[tuple[str, int, float, str], dict[str, np.ndarray]]]:
    cells = [(t, n, phi, d) for t in truths for n in sizes for phi in phis for d in DESIGNS]
    tasks = [
        (t, n, phi, d, 1_000_003 * ci + r)
        for ci, (t, n, phi, d) in enumerate(cells)
        for r in range(replications)
    ]
    with ProcessPoolExecutor(max_workers=jobs) as pool:
        rows = list(pool.map(replicate, tasks, chunksize=2))
    out = []
    for ci, cell in enumerate(cells):
        chunk = rows[ci * replications : (ci + 1) * replications]
        out.append((cell, {k: np.array([r[k] for r in chunk]) for k in chunk[0]}))
    return out


def table(results: list[tuple[tuple[str, int, float, str], dict[str, np.ndarray]]]) -> str:
    lines = [
        "| truth | n | phi | design | median ASE ratio | p90 | found correlated | median phi_hat | pointwise | simultaneous |",
        "|---|---|---|---|---|---|---|---|---|---|",
    ]
    for (t, n, phi, d), res in results:
        r = res["ratio"]
        lines.append(
            f"| {t} | {n} | {phi} | {d} | {np.median(r):.2f} | {np.quantile(r, 0.9):.2f} | "
            f"{res['correlated'].mean():.2f} | {np.median(res['phi_hat']):.2f} | "
            f"{res['pointwise'].mean():.3f} | {res['simultaneous'].mean():.2f} |"
        )
    lines.append("")
    lines.append("| phi | median ASE ratio (all cells) | p90 | pointwise | simultaneous |")
    lines.append("|---|---|---|---|---|")
    for phi in sorted({c[2] for c, _ in results}):
        sub = [res for c, res in results if c[2] == phi]
        r = np.concatenate([s["ratio"] for s in sub])
        pw = np.concatenate([s["pointwise"] for s in sub])
        sim = np.concatenate([s["simultaneous"] for s in sub])
        lines.append(f"| {phi} | {np.median(r):.2f} | {np.quantile(r, 0.9):.2f} | {pw.mean():.3f} | {sim.mean():.2f} |")
    return "\n".join(lines)


def main(argv: Sequence[str] | None = None) -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--full", action="store_true", help="100 replications per cell, every size")
    parser.add_argument("--replications", type=int, default=None)
    parser.add_argument("--sizes", type=int, nargs="*", default=None)
    parser.add_argument("--truths", nargs="*", default=list(TRUTHS))
    parser.add_argument("--phis", type=float, nargs="*", default=list(PHIS))
    parser.add_argument("--jobs", type=int, default=2)
    args = parser.parse_args(list(argv) if argv is not None else None)
    reps = args.replications or (100 if args.full else 8)
    sizes = args.sizes or (list(SIZES) if args.full else [300, 1000])
    start = time.perf_counter()
    results = run(reps, sizes, args.jobs, args.truths, args.phis)
    print("## Correlated-noise study: ASE ratio to the oracle and band coverage (noise auto)\n")
    print(f"AR(1) noise, sd {SD}; local linear, gaussian kernel; every setting at its default (noise auto); {reps} replications per "
          f"cell; oracle over {FINE} bandwidths; 95 % analytic bands at {POINTS.size} points.\n")
    print(table(results))
    print(f"\nMachine: {describe()}; {time.perf_counter() - start:.0f} s")


if __name__ == "__main__":
    main()
