"""Predictions at points in any order: ``predict`` at sorted and at shuffled points, as ratios to ``np.argsort``.

    python -m tests.bench.bench_predict_order [--n 1e6] [--repeat 3]

Target: at shuffled points, at most one argsort plus 1.3x the sorted case. Rounds
alternate between the rows so a disturbance of the shared machine hits each alike;
the table gives the best round and the range.
"""

from __future__ import annotations

import argparse
import time

import numpy as np

from estimators import fit


def run(n: int, kernel: str, repeat: int) -> dict[str, list[float]]:
    rng = np.random.default_rng(0)
    x = rng.uniform(0.0, 100.0, n)
    y = np.sin(x / 4.0) + rng.normal(0.0, 0.3, n)
    smoother = fit(x, y, kernel=kernel, bandwidth=1.0)
    points = rng.uniform(0.0, 100.0, n)
    ordered = np.sort(points)
    smoother.predict(points[:1000])  # compile or load the sweep outside the timing
    rows = {
        "np.argsort(points) (baseline)": lambda: np.argsort(points),
        "predict, sorted points": lambda: smoother.predict(ordered),
        "predict, shuffled points": lambda: smoother.predict(points),
        "predict at the data, caller's order": lambda: smoother.predict(x),
    }
    times: dict[str, list[float]] = {name: [] for name in rows}
    for _ in range(repeat):
        for name, fn in rows.items():
            t0 = time.perf_counter()
            fn()
            times[name].append(time.perf_counter() - t0)
    return times


def table(results: dict[str, dict[str, list[float]]]) -> str:
    lines = ["| kernel | what | best × argsort | range × argsort | target × argsort |", "|---|---|---:|---:|---:|"]
    for kernel, times in results.items():
        names = list(times)
        base = min(times[names[0]])
        sorted_ratio = min(times[names[1]]) / base
        for name in names[1:]:
            best, worst = min(times[name]) / base, max(times[name]) / base
            target = f"{1.0 + 1.3 * sorted_ratio:.2f}" if name != names[1] else ""
            lines.append(f"| {kernel} | {name} | {best:.2f} | {best:.2f}–{worst:.2f} | {target} |")
    return "\n".join(lines)


def main(argv: list[str] | None = None) -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--n", type=float, default=1e6)
    parser.add_argument("--repeat", type=int, default=3)
    args = parser.parse_args(argv)
    n = int(args.n)
    print(f"## Predictions in any order, n = {n:.0e} data and prediction points, bandwidth 1 on x ~ U(0, 100)\n")
    print(table({kernel: run(n, kernel, args.repeat) for kernel in ("epanechnikov", "gaussian")}))


if __name__ == "__main__":
    main()
