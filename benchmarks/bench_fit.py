"""Benchmarks of the fit core as same-run ratios (run with ``make bench``; not part of the test suite).

Goals (issue 4):
- one interactive refresh (point prediction with CI/PI, k traces of 50 points, and a 100 x 100 slice with CI/PI
  when ``kernel_core.surface`` is present) for a 5-factor quadratic: >= 50x faster than statsmodels
  ``get_prediction`` on numpy arrays (the traces through ``Fit.traces``, all factors in one batch);
- diagnostics at n = 10,000: >= 1000x faster than statsmodels ``get_influence().summary_frame()``;
- an exclusion: >= 10x faster than a statsmodels refit;
- a fit of n = 100,000 rows, p = 21: within 1.5x of a plain pivoted-QR solve.

Times are medians of interleaved repeats with BLAS pinned to one thread. ``--quick`` runs the statsmodels
influence reference at n = 2,000 instead of 10,000 (it refits n times: ~1 minute at 10,000).
"""

from __future__ import annotations

import os
import statistics
import sys
import time

os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")

import numpy as np  # noqa: E402
import pandas as pd  # noqa: E402
import scipy.linalg  # noqa: E402
import statsmodels.api as sm  # noqa: E402

from kernel_core import fit  # noqa: E402

FACTORS = list("ABCDE")


def median_time(fn, repeats=7, number=1):
    times = []
    for _ in range(repeats):
        start = time.perf_counter()
        for _ in range(number):
            fn()
        times.append((time.perf_counter() - start) / number)
    return statistics.median(times)


def quadratic_data(n, seed=0):
    rng = np.random.default_rng(seed)
    data = pd.DataFrame(rng.uniform(-1, 1, (n, len(FACTORS))), columns=FACTORS)
    data["y"] = rng.normal(size=n) + data.A - data.B * data.C
    return data


def refresh(quick):
    data = quadratic_data(32)
    result = fit(data, "y", "quadratic")
    ref = sm.OLS(result.y, result.X).fit()
    settings = {name: 0.2 for name in FACTORS}
    point = result.predictor.rows(np.array([[0.2] * 5]))
    traces = [result.predictor.rows(np.column_stack([np.linspace(-1, 1, 50) if f == g else np.full(50, 0.2)
                                                    for g in FACTORS])) for f in FACTORS]
    try:
        from kernel_core.surface import slice_grid  # noqa: F401

        has_slice = True
    except ImportError:
        has_slice = False
    grid = np.meshgrid(np.linspace(-1, 1, 100), np.linspace(-1, 1, 100))
    slice_rows = result.predictor.rows(np.column_stack([grid[0].ravel(), grid[1].ravel()] + [np.full(10000, 0.2)] * 3))

    def ours():
        result.predictor.intervals(np.array([[0.2] * 5]), 0.95)
        result.traces(settings)
        if has_slice:
            result.slice("A", "B", settings, shape=(100, 100))

    def theirs():
        ref.get_prediction(point).summary_frame(alpha=0.05)
        for rows in traces:
            ref.get_prediction(rows).summary_frame(alpha=0.05)
        if has_slice:
            ref.get_prediction(slice_rows).summary_frame(alpha=0.05)

    a, b = median_time(ours, number=20), median_time(theirs, number=3)
    what = "point + 5 traces" + (" + 100x100 slice" if has_slice else " (no slice module on this branch)")
    print(f"interactive refresh, {what}: ours {a * 1e6:.0f} us, statsmodels {b * 1e6:.0f} us, "
          f"ratio {b / a:.0f}x (goal >= 50x)")


def diagnostics(quick):
    n = 2000 if quick else 10000
    data = quadratic_data(n, seed=1)
    result = fit(data, "y", "quadratic")
    ref = sm.OLS(result.y, np.asarray(result.X)).fit()

    def ours():
        fresh = fit(data, "y", "quadratic")
        return fresh.diagnostics

    a = median_time(ours, repeats=5)
    start = time.perf_counter()
    ref.get_influence().summary_frame()
    b = time.perf_counter() - start
    print(f"diagnostics n={n}: ours {a * 1e3:.1f} ms (fit included), statsmodels {b:.1f} s, ratio {b / a:.0f}x "
          "(goal >= 1000x at n = 10,000)")


def exclusion(quick):
    data = quadratic_data(32, seed=2)
    result = fit(data, "y", "quadratic")
    X, y = np.asarray(result.X), result.y

    def ours():
        return result.exclude(5, "bench").beta

    def theirs():
        return sm.OLS(np.delete(y, 5), np.delete(X, 5, axis=0)).fit().params

    a, b = median_time(ours, number=200), median_time(theirs, number=50)
    print(f"exclusion: ours {a * 1e6:.1f} us, statsmodels refit {b * 1e6:.0f} us, ratio {b / a:.0f}x (goal >= 10x)")


def big_fit(quick):
    data = quadratic_data(100_000, seed=3)
    result = fit(data, "y", "quadratic")
    X, y = np.ascontiguousarray(result.X), result.y

    def plain():
        q, r, piv = scipy.linalg.qr(X, mode="economic", pivoting=True)
        return scipy.linalg.solve_triangular(r, q.T @ y)

    a, b = median_time(lambda: fit(data, "y", "quadratic"), repeats=5), median_time(plain, repeats=5)
    print(f"fit n=100,000 p=21: ours {a * 1e3:.0f} ms, plain pivoted QR {b * 1e3:.0f} ms, ratio {a / b:.2f}x "
          "(goal <= 1.5x)")


def main():
    quick = "--quick" in sys.argv
    refresh(quick)
    exclusion(quick)
    big_fit(quick)
    diagnostics(quick)


if __name__ == "__main__":
    main()
