"""Fit + predict at the data points: exact and binned engines vs the dense formula and the sort floor.

Every figure is a ratio to ``np.argsort(x)`` on the same data in the same run
(the unavoidable cost of looking at unsorted data), or to the vectorised dense
formula. Peak memory is measured with ``tracemalloc`` (numpy reports its
buffers to it) and given in float64 arrays of length ``n``.

Run: ``python -m tests.bench.bench_core [--max-n 1e7]``.
"""

from __future__ import annotations

import argparse
import time
import tracemalloc

import numpy as np

from estimators import KERNELS, fit

from .machine import describe
from .timing import best_of

DENSE_BUDGET_S = 30.0


def dense_fit(x: np.ndarray, y: np.ndarray, kernel: str, h: float, degree: int = 1, chunk: int = 512) -> np.ndarray:
    """The vectorised dense formula: kernel weight matrix block by block, then the local normal equations."""
    k = KERNELS[kernel]
    out = np.empty(x.size)
    for s in range(0, x.size, chunk):
        t = x[s : s + chunk]
        u = (x[None, :] - t[:, None]) / h
        w = k(u)
        mom = np.stack([(w * u**j).sum(axis=1) for j in range(2 * degree + 1)], axis=1)
        rhs = np.stack([(w * u**j) @ y for j in range(degree + 1)], axis=1)
        mat = np.stack([mom[:, i : i + degree + 1] for i in range(degree + 1)], axis=1)
        out[s : s + chunk] = np.linalg.solve(mat, rhs[..., None])[:, 0, 0]
    return out


def _data(n: int, seed: int = 0) -> tuple[np.ndarray, np.ndarray]:
    rng = np.random.default_rng(seed)
    x = rng.uniform(0.0, 100.0, n)
    return x, np.sin(x / 4) + rng.normal(0, 0.3, n)


def _peak_arrays(fn, n: int) -> float:  # type: ignore[no-untyped-def]
    tracemalloc.start()
    fn()
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    return peak / (8.0 * n)


def run(max_n: float = 1e7) -> list[dict[str, object]]:
    rows = []
    sizes = [int(s) for s in (1e3, 1e4, 2e4, 1e5, 1e6, 1e7) if s <= max_n]
    dense_rate = None
    for n in sizes:
        x, y = _data(n)
        h = 0.002 * 100.0  # 0.2% of the x range
        repeat = 5 if n <= 1e5 else (3 if n <= 1e6 else 1)
        t_sort = best_of(lambda: np.argsort(x), repeat)
        row: dict[str, object] = {"n": n, "argsort_s": t_sort}
        for kernel in ("epanechnikov", "gaussian"):
            for engine in ("auto", "exact", "binned"):
                fn = lambda: fit(x, y, kernel=kernel, bandwidth=h, engine=engine).fitted()  # noqa: E731
                fn()  # warm caches (compiled code is already cached on disk)
                row[f"{kernel}_{engine}_s"] = best_of(fn, repeat)
        bh = 0.05 * 100.0  # a typical bandwidth for the dense comparison (windows of 10% of the data)
        predicted = None if dense_rate is None else dense_rate * n * n
        if predicted is None or predicted < DENSE_BUDGET_S:
            t0 = time.perf_counter()
            dense_fit(x, y, "epanechnikov", bh)
            td = time.perf_counter() - t0
            dense_rate = td / (n * n)
            row["dense_s"] = td
            row["fast_at_dense_h_s"] = best_of(lambda: fit(x, y, kernel="epanechnikov", bandwidth=bh).fitted(), repeat)
        if n <= 1e6:
            row["peak_arrays_epanechnikov"] = _peak_arrays(
                lambda: fit(x, y, kernel="epanechnikov", bandwidth=h).fitted(), n
            )
            row["peak_arrays_gaussian"] = _peak_arrays(lambda: fit(x, y, kernel="gaussian", bandwidth=h).fitted(), n)
        rows.append(row)
    return rows


def run_kernels(n: int = 1_000_000) -> list[tuple[str, float]]:
    """Default engine for every compact kernel at ``n`` (h = 0.2% of the range), as ratios to argsort."""
    x, y = _data(n)
    h = 0.002 * 100.0
    t_sort = best_of(lambda: np.argsort(x), 3)
    out = []
    for kernel, spec in KERNELS.items():
        if spec.shape is None:
            continue
        for degree in (0, 1, 2):
            fn = lambda: fit(x, y, kernel=kernel, degree=degree, bandwidth=h).fitted()  # noqa: E731
            fn()
            out.append((f"{kernel}, degree {degree}", best_of(fn, 3) / t_sort))
    return out


def table(rows: list[dict[str, object]]) -> str:
    head = (
        "| n | argsort | epanechnikov auto | exact | binned | gaussian auto | exact | binned "
        "| dense / fast (h = 5%) | peak memory (arrays of n) |\n|---|---|---|---|---|---|---|---|---|---|"
    )
    lines = [head]
    for r in rows:
        s = float(r["argsort_s"])  # type: ignore[arg-type]
        cells = [f"{r['n']:.0e}", f"{s * 1e3:.1f} ms"]
        for key in (
            "epanechnikov_auto_s",
            "epanechnikov_exact_s",
            "epanechnikov_binned_s",
            "gaussian_auto_s",
            "gaussian_exact_s",
            "gaussian_binned_s",
        ):
            cells.append(f"{float(r[key]) / s:.1f}x")  # type: ignore[arg-type]
        if "dense_s" in r:
            cells.append(f"{float(r['dense_s']) / float(r['fast_at_dense_h_s']):.0f}x")  # type: ignore[arg-type]
        else:
            cells.append("> 30 s, not run")
        if "peak_arrays_epanechnikov" in r:
            cells.append(f"{r['peak_arrays_epanechnikov']:.1f} / {r['peak_arrays_gaussian']:.1f}")
        else:
            cells.append("-")
        lines.append("| " + " | ".join(cells) + " |")
    return "\n".join(lines)


def main(argv: list[str] | None = None) -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--max-n", type=float, default=1e7)
    args = parser.parse_args(argv)
    print(f"## Numerics: fit + predict at the data points, h = 0.2% of the x range ({describe()})")
    print("Times are ratios to np.argsort(x) on the same data in the same run.\n")
    print(table(run(args.max_n)))
    if args.max_n >= 1e6:
        print("\nEvery compact kernel, n = 1e6, default engine (ratio to np.argsort; target 3x):\n")
        print("| kernel, degree | ratio |\n|---|---|")
        for label, ratio in run_kernels():
            print(f"| {label} | {ratio:.1f}x |")


if __name__ == "__main__":
    main()
