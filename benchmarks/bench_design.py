"""Benchmarks of design generation (run with ``make bench``; not part of the test suite).

Goals (issue 3): the minimum-aberration search <= 1 s for every k <= 15 at 16 runs and k <= 11 at 32 and
64 runs (and 128 runs); D-optimal, 6 factors, full quadratic, 40 runs, 10 starts <= 3 s. Times are wall-clock
medians of 3 repeats with BLAS pinned to one thread; on a shared machine they drift, so read them as a rough
check against the goals.
"""

from __future__ import annotations

import os
import statistics
import time

os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")

from kernel_core.fractional import minimum_aberration  # noqa: E402
from kernel_core.optimal import optimal_design  # noqa: E402


def timed(fn, repeats=3):
    times = []
    for _ in range(repeats):
        start = time.perf_counter()
        result = fn()
        times.append(time.perf_counter() - start)
    return statistics.median(times), result


def main():
    worst = 0.0
    cases = [(4, k) for k in range(5, 16)] + [(m, k) for m in (5, 6, 7) for k in range(m + 1, 12)]
    for m, k in cases:
        t, (_, pattern, complete) = timed(lambda m=m, k=k: minimum_aberration(k, m))
        worst = max(worst, t)
        flag = "" if complete else "  (search stopped at its bound)"
        print(f"minimum aberration 2^({k}-{k - m}) in {1 << m:3d} runs: {t * 1000:8.1f} ms  "
              f"A3.. = {pattern[2:8]}{flag}")
    print(f"worst minimum-aberration search: {worst:.3f} s (goal <= 1 s)")
    t, d = timed(lambda: optimal_design(6, "quadratic", runs=40, starts=10, seed=1))
    print(f"D-optimal 6 factors quadratic 40 runs 10 starts: {t:.3f} s (goal <= 3 s), "
          f"D-efficiency {d.metadata['d_efficiency']:.2f}%")


if __name__ == "__main__":
    main()
