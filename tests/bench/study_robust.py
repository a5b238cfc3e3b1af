"""Readings that are not clean Gaussian noise: spikes, anomaly flags, counts, and the cost.

Spikes: ``y_i = m(x_i) + e_i``, ``m(t) = 20 + 6 sin(2 pi t) + 4 t``, ``x ~ U(0, 1)``,
``e ~ N(0, 1)``, n = 800; 5 % of the readings (drawn at random) get a one-sided spike
``U(8, 15)``. Each sample is fitted four ways with the gaussian kernel, local linear, automatic
bandwidth: the plain fit (GCV) of the clean readings (the yardstick), the plain fit of the
spiky readings, and the robust fit (``robust=True``) of both. ``ASE = n^-1 sum (mhat(x_i) -
m(x_i))^2``. Anomalies: :func:`estimators.anomalies.find_anomalies` at level 0.999 on the
robust fit; recall = share of the spikes flagged, false-flag rate = share of the other readings
flagged. Band: the analytic 95 % pointwise band of the robust fit on the spiky readings at 33
interior points in [0.1, 0.9], its coverage of ``m``.

Clean data: the same samples without spikes; the robust fit's ASE against the plain fit's, and
the false-flag rate at 0.999 (expected about 0.001).

Counts: ``y_i ~ Poisson(lambda(x_i))``, ``lambda(t) = 0.5 + 36.5 (0.5 + 0.5 sin(2 pi t))^2``
(0.5 to 37), ``x ~ U(0, 1)``, n = 600. ``family="poisson"`` with automatic bandwidth, the 95 %
band at 40 points in [0.02, 0.98]: negative estimates or limits, and pointwise coverage of
``lambda``. The default (gaussian) fit is shown for contrast. Count spikes: 5 % of the readings get
``round(5 sqrt(lambda) + 10)`` more; anomalies at 0.999 from the robust count fit
(``family="poisson", robust=True``), and on the clean counts.

Speed: n = 10^6 readings of the spike model (clean) and of the count model; automatic bandwidth,
a 200-point curve and the fitted values; the robust and Poisson fits against the plain fit,
measured in the same run.

Targets (issue 25): spikes median ASE ratio <= 1.5; recall >= 0.9, false-flag rate <= 1 %;
clean data ASE ratio <= 1.15 and false-flag rate about 0.001; counts: no negative estimate or
limit, coverage 0.90-0.985; speed: robust <= 6x, Poisson <= 10x the plain fit.

Run: ``python -m tests.bench.study_robust [--replications R] [--jobs J] [--speed-n N]``.
"""

from __future__ import annotations

import argparse
import math
import time
from concurrent.futures import ProcessPoolExecutor

import numpy as np

from estimators import fit
from estimators.anomalies import find_anomalies

from .machine import describe

N_SPIKES = 800
N_COUNTS = 600
SHARE = 0.05
LEVEL = 0.999
BAND_POINTS = np.linspace(0.1, 0.9, 33)
COUNT_POINTS = np.linspace(0.02, 0.98, 40)


def truth(t: np.ndarray) -> np.ndarray:
    return 20.0 + 6.0 * np.sin(2.0 * math.pi * t) + 4.0 * t


def intensity(t: np.ndarray) -> np.ndarray:
    return 0.5 + 36.5 * (0.5 + 0.5 * np.sin(2.0 * math.pi * t)) ** 2


def spikes_replication(rep: int) -> dict[str, float]:
    rng = np.random.default_rng([20261205, rep])
    x = rng.uniform(0.0, 1.0, N_SPIKES)
    clean = truth(x) + rng.standard_normal(N_SPIKES)
    y = clean.copy()
    hit = rng.choice(N_SPIKES, int(SHARE * N_SPIKES), replace=False)
    y[hit] += rng.uniform(8.0, 15.0, hit.size)
    m = truth(x)

    def ase(s: object) -> float:
        return float(np.mean((s.fitted() - m) ** 2))  # type: ignore[attr-defined]

    base = ase(fit(x, clean))
    robust = fit(x, y, robust=True)
    robust_clean = fit(x, clean, robust=True)
    flagged = find_anomalies(robust, LEVEL).index
    is_spike = np.zeros(N_SPIKES, dtype=bool)
    is_spike[hit] = True
    band = robust.bands(BAND_POINTS, level=0.95, method="analytic")
    mb = truth(BAND_POINTS)
    return {
        "plain_spiky": ase(fit(x, y)) / base,
        "robust_spiky": ase(robust) / base,
        "robust_clean": ase(robust_clean) / base,
        "recall": float(np.mean(np.isin(hit, flagged))),
        "false_rate": float(np.count_nonzero(~is_spike[flagged]) / (N_SPIKES - hit.size)),
        "clean_false_rate": float(len(find_anomalies(robust_clean, LEVEL)) / N_SPIKES),
        "band_coverage": float(np.mean((band.lower <= mb) & (mb <= band.upper))),
    }


def counts_replication(rep: int) -> dict[str, float]:
    rng = np.random.default_rng([20261206, rep])
    x = rng.uniform(0.0, 1.0, N_COUNTS)
    y = rng.poisson(intensity(x)).astype(float)
    lam = intensity(COUNT_POINTS)
    s = fit(x, y, family="poisson")
    band = s.bands(COUNT_POINTS, level=0.95, method="analytic")
    est = s.predict(COUNT_POINTS)
    g = fit(x, y)
    gb = g.bands(COUNT_POINTS, level=0.95, method="analytic")
    spiky = y.copy()
    hit = rng.choice(N_COUNTS, int(SHARE * N_COUNTS), replace=False)
    spiky[hit] += np.round(5.0 * np.sqrt(intensity(x[hit])) + 10.0)
    flagged = find_anomalies(fit(x, spiky, family="poisson", robust=True), LEVEL).index
    is_spike = np.zeros(N_COUNTS, dtype=bool)
    is_spike[hit] = True
    return {
        "spike_recall": float(np.mean(np.isin(hit, flagged))),
        "spike_false_rate": float(np.count_nonzero(~is_spike[flagged]) / (N_COUNTS - hit.size)),
        "clean_false_rate": float(len(find_anomalies(fit(x, y, family="poisson", robust=True), LEVEL)) / N_COUNTS),
        "negatives": float(np.count_nonzero(est < 0) + np.count_nonzero(band.lower < 0)),
        "coverage": float(np.mean((band.lower <= lam) & (lam <= band.upper))),
        "gaussian_negatives": float(np.count_nonzero(g.predict(COUNT_POINTS) < 0) + np.count_nonzero(gb.lower < 0)),
        "gaussian_coverage": float(np.mean((gb.lower <= lam) & (lam <= gb.upper))),
    }


def _timed(run: object) -> float:
    start = time.perf_counter()
    run()  # type: ignore[operator]
    return time.perf_counter() - start


def speed(n: int) -> list[tuple[str, float, float]]:
    rng = np.random.default_rng(7)
    x = np.sort(rng.uniform(0.0, 1.0, n))
    y = truth(x) + rng.standard_normal(n)
    c = rng.poisson(intensity(x)).astype(float)
    grid = np.linspace(0.0, 1.0, 200)

    def job(values: np.ndarray, **options: object) -> object:
        def run() -> None:
            s = fit(x, values, **options)  # type: ignore[arg-type]
            s.predict(grid)
            s.fitted()
        return run

    step = max(n // 5000, 1)
    for warm in (dict(), dict(robust=True)):
        fit(x[::step], y[::step], **warm).fitted()  # type: ignore[arg-type]
    fit(x[::step], c[::step], family="poisson").fitted()
    rows = []
    plain = _timed(job(y))
    rows.append(("robust fit (spike model, clean)", plain, _timed(job(y, robust=True))))
    plain_c = _timed(job(c))
    rows.append(("poisson fit (count model)", plain_c, _timed(job(c, family="poisson"))))
    return rows


def _summary(values: np.ndarray) -> str:
    return f"median {np.median(values):.3f}, mean {np.mean(values):.3f}, p90 {np.quantile(values, 0.9):.3f}"


def main(argv: list[str] | None = None) -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--replications", type=int, default=200)
    parser.add_argument("--jobs", type=int, default=2)
    parser.add_argument("--speed-n", type=int, default=1_000_000)
    args = parser.parse_args(argv)
    start = time.perf_counter()
    with ProcessPoolExecutor(max_workers=args.jobs) as pool:
        spikes = list(pool.map(spikes_replication, range(args.replications), chunksize=4))
        counts = list(pool.map(counts_replication, range(args.replications), chunksize=4))
    col = {k: np.array([r[k] for r in spikes]) for k in spikes[0]}
    cnt = {k: np.array([r[k] for r in counts]) for k in counts[0]}
    r = args.replications
    print(f"## Spikes, anomaly flags and counts ({describe()})")
    print(f"{r} samples per row; gaussian kernel, local linear, automatic bandwidth. ASE ratios are against the plain fit of the clean readings of the same sample.\n")
    print("| measure | result | target |")
    print("|---|---|---|")
    print(f"| spikes: plain fit, ASE ratio | {_summary(col['plain_spiky'])} | (for contrast) |")
    print(f"| spikes: robust fit, ASE ratio | {_summary(col['robust_spiky'])} | median <= 1.5 |")
    print(f"| spikes: anomaly recall at 0.999 | mean {col['recall'].mean():.3f}, min {col['recall'].min():.3f} | >= 0.9 |")
    print(f"| spikes: false-flag rate at 0.999 | mean {col['false_rate'].mean():.4f}, max {col['false_rate'].max():.4f} | <= 0.01 |")
    print(f"| spikes: robust 95 % analytic band, pointwise coverage | {col['band_coverage'].mean():.3f} ± {col['band_coverage'].std(ddof=1) / math.sqrt(r):.3f} | about 0.95 |")
    print(f"| clean: robust fit, ASE ratio | {_summary(col['robust_clean'])} | <= 1.15 |")
    print(f"| clean: false-flag rate at 0.999 | mean {col['clean_false_rate'].mean():.4f} | about 0.001 |")
    print(f"| counts (poisson): negative estimates or lower limits | {int(cnt['negatives'].sum())} of {2 * COUNT_POINTS.size * r} | 0 |")
    print(f"| counts (poisson): 95 % band, pointwise coverage | {cnt['coverage'].mean():.3f} ± {cnt['coverage'].std(ddof=1) / math.sqrt(r):.3f} | 0.90-0.985 |")
    print(f"| counts with spikes (robust poisson): anomaly recall at 0.999 | mean {cnt['spike_recall'].mean():.3f}, min {cnt['spike_recall'].min():.3f} | |")
    print(f"| counts with spikes (robust poisson): false-flag rate at 0.999 | mean {cnt['spike_false_rate'].mean():.4f}, max {cnt['spike_false_rate'].max():.4f} | |")
    print(f"| clean counts (robust poisson): false-flag rate at 0.999 | mean {cnt['clean_false_rate'].mean():.4f} | at most about 0.001 |")
    print(f"| counts (gaussian, for contrast): negatives | {int(cnt['gaussian_negatives'].sum())} of {2 * COUNT_POINTS.size * r} | |")
    print(f"| counts (gaussian, for contrast): coverage | {cnt['gaussian_coverage'].mean():.3f} | |")
    if args.speed_n > 0:
        print(f"\n| speed, n = {args.speed_n:,} (auto bandwidth, 200-point curve, fitted values) | plain | this fit | ratio | target |")
        print("|---|---|---|---|---|")
        for (label, plain, other), target in zip(speed(args.speed_n), ("<= 6", "<= 10"), strict=True):
            print(f"| {label} | {plain:.2f} s | {other:.2f} s | {other / plain:.2f} | {target} |")
    print(f"\n({time.perf_counter() - start:.0f} s)")


if __name__ == "__main__":
    main()
