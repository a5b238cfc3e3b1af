"""Bootstrap bands at n = 1e5: 1000 replicates on a 200-point curve vs ``np.argsort(x)``.

Every time is a ratio to ``np.argsort(x)`` on the same data in the same run.
Rows:

* ``replicates``: ``s.bands(points, replicates=1000)`` on a smoother whose
  residual quantities are already computed (they are computed once per
  smoother) - the cost of the 1000 replicates, the bias-corrected centre and
  the quantiles; target <= 100x;
* ``end to end``: a fresh ``fit(x, y, bandwidth=h)`` followed by the same call,
  so it includes the smoother's own fit at all data points (shown alone in
  ``fit at the data``) and the leverage adjustment of the residuals;
* peak memory (``tracemalloc``) of the replicate stage for 1000 and 4000
  replicates, in float64 arrays of length ``n``: it must not grow with
  ``replicates * n`` (1000 replicates held at once would be 1000 arrays).

The bandwidth is the GCV choice (selection not timed).

Run: ``python -m tests.bench.bench_bootstrap [--n 1e5] [--replicates 1000]``.
"""

from __future__ import annotations

import argparse
import tracemalloc
from collections.abc import Callable

import numpy as np

from estimators import fit, select_bandwidth
from estimators.uncertainty import bands

from .machine import describe
from .timing import best_of

POINTS = 200


def _peak(fn: Callable[[], object]) -> int:
    tracemalloc.start()
    fn()
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    return peak


def run(n: int, replicates: int, repeat: int = 5) -> list[dict[str, object]]:
    rng = np.random.default_rng(0)
    x = rng.uniform(0.0, 100.0, n)
    y = np.sin(x / 4) + rng.normal(0, 0.3, n)
    points = np.linspace(0.0, 100.0, POINTS)
    rows = []
    for kernel in ("gaussian", "epanechnikov"):
        h = select_bandwidth(x, y, kernel=kernel, selector="gcv").chosen
        row: dict[str, object] = {"kernel": kernel, "h": h}
        s = fit(x, y, kernel=kernel, bandwidth=h)
        for label, kw in (
            ("wild", dict(method="wild_bootstrap")),
            ("wild_mammen", dict(method="wild_bootstrap", multiplier="mammen")),
            ("wild_simultaneous", dict(method="wild_bootstrap", simultaneous=True)),
            ("residual", dict(method="residual_bootstrap")),
            ("analytic", dict(method="analytic")),
        ):
            bands(s, points, replicates=replicates, **kw)  # type: ignore[arg-type]  # warm: residuals, noise scale
            if label == "wild":
                row["sort"] = best_of(lambda: np.argsort(x), repeat)
                row[label] = best_of(lambda: bands(s, points, replicates=replicates, **kw), repeat)  # type: ignore[arg-type]
                row["sort_after"] = best_of(lambda: np.argsort(x), repeat)
            else:
                row[label] = best_of(lambda: bands(s, points, replicates=replicates, **kw), 3)  # type: ignore[arg-type]
        row["fit_at_data"] = best_of(lambda: fit(x, y, kernel=kernel, bandwidth=h).fitted(), repeat)
        row["end_to_end"] = best_of(
            lambda: fit(x, y, kernel=kernel, bandwidth=h).bands(points, replicates=replicates), repeat
        )
        row["peak_1x"] = _peak(lambda: s.bands(points, replicates=replicates, seed=1)) / (8.0 * n)
        row["peak_4x"] = _peak(lambda: s.bands(points, replicates=4 * replicates, seed=1)) / (8.0 * n)
        rows.append(row)
    return rows


def table(rows: list[dict[str, object]], n: int, replicates: int) -> str:
    lines = [
        "| kernel (GCV h) | argsort | replicates: wild (Rademacher) | wild (Mammen) | wild, simultaneous "
        "| residual bootstrap | analytic | fit at the data | end to end (fit + wild) "
        f"| peak memory, {replicates} / {4 * replicates} replicates (arrays of n) |",
        "|---|---|---|---|---|---|---|---|---|---|",
    ]
    for r in rows:
        sort = min(float(r["sort"]), float(r["sort_after"]))  # type: ignore[arg-type]
        cells = [f"{r['kernel']} ({float(r['h']):.3g})", f"{sort * 1e3:.2f} ms"]  # type: ignore[arg-type]
        for key in ("wild", "wild_mammen", "wild_simultaneous", "residual", "analytic", "fit_at_data", "end_to_end"):
            cells.append(f"{float(r[key]) / sort:.0f}x")  # type: ignore[arg-type]
        cells.append(f"{float(r['peak_1x']):.1f} / {float(r['peak_4x']):.1f}")  # type: ignore[arg-type]
        lines.append("| " + " | ".join(cells) + " |")
    return "\n".join(lines)


def main(argv: list[str] | None = None) -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--n", type=float, default=1e5)
    parser.add_argument("--replicates", type=int, default=1000)
    args = parser.parse_args(argv)
    n = int(args.n)
    print(f"## Bootstrap bands: {args.replicates} replicates, {POINTS}-point curve, n = {n:.0e} ({describe()})")
    print("Times are ratios to np.argsort(x) on the same data in the same run (best of several); target for")
    print("the replicate stage <= 100x. x ~ U(0, 100), y = sin(x/4) + N(0, 0.3^2), local linear.\n")
    print(table(run(n, args.replicates), n, args.replicates))


if __name__ == "__main__":
    main()
