"""Interleaved timing of our case and its reference, repeat by repeat.

The machines here are shared and noisy, so absolute times drift; a ratio of two medians
measured in the same run, with the two cases alternating, is what holds. A sample of a
very short call times a loop of ``number`` calls (calibrated so one sample lasts at least
``min_sample`` seconds) and divides, as :mod:`timeit` does.
"""

from __future__ import annotations

import gc
import math
import time
from dataclasses import dataclass, field

import numpy as np


@dataclass
class Samples:
    """Per-call times (seconds) of one side of a case."""

    times: list = field(default_factory=list)
    number: int = 1  # calls per sample

    @property
    def median(self) -> float | None:
        return float(np.median(self.times)) if self.times else None

    def percentile(self, q: float) -> float | None:
        return float(np.percentile(self.times, q)) if self.times else None


def _time(fn, number: int) -> float:
    gc_was_enabled = gc.isenabled()
    gc.disable()
    try:
        start = time.perf_counter()
        for _ in range(number):
            fn()
        return (time.perf_counter() - start) / number
    finally:
        if gc_was_enabled:
            gc.enable()


def _calibrate(fn, min_sample: float, slow: float) -> tuple[int, float | None]:
    """Calls per sample, and the warm-up time when the warm-up itself is a usable sample.

    A call slower than *slow* seconds is not repeated for warm-up: its first call counts
    as a sample (it would cost minutes otherwise).
    """
    first = _time(fn, 1)
    if first >= slow:
        return 1, first
    second = _time(fn, 1)  # the first call may have paid for imports and caches
    return max(1, math.ceil(min_sample / max(second, 1e-9))), None


def interleaved(ours, reference=None, *, repeats: int, reference_repeats: int | None = None,
                min_sample: float = 0.005, budget: float = float("inf"), slow: float = 0.5):
    """Time *ours* and *reference* alternately, *repeats* samples each.

    Parameters
    ----------
    ours, reference : callable or None
        Zero-argument callables. ``reference=None`` times ours alone.
    repeats : int
        Samples of ours.
    reference_repeats : int, optional
        Fewer samples of a very slow reference, spread evenly over the repeats.
    min_sample : float
        Seconds a sample should last at least (short calls are looped).
    budget : float
        Wall-clock seconds after which no further repeats start (at least 3 are kept).
    slow : float
        A first call slower than this counts as a sample instead of a warm-up.

    Returns
    -------
    (Samples, Samples or None, bool)
        Our samples, the reference's, and whether the budget cut the repeats short.
    """
    start = time.perf_counter()
    mine = Samples()
    mine.number, warm = _calibrate(ours, min_sample, slow)
    if warm is not None:
        mine.times.append(warm)
    theirs = None
    ref_at: set = set()
    if reference is not None:
        theirs = Samples()
        theirs.number, warm_ref = _calibrate(reference, min_sample, slow)
        wanted = repeats if reference_repeats is None else max(1, min(repeats, reference_repeats))
        if warm_ref is not None:
            theirs.times.append(warm_ref)
            wanted -= 1
        ref_at = set(np.linspace(0, repeats - 1, wanted).round().astype(int).tolist()) if wanted > 0 else set()
    cut = False
    for i in range(repeats):
        if i >= 3 and time.perf_counter() - start > budget:
            cut = True
            break
        pair = []
        if len(mine.times) < repeats:
            pair.append((ours, mine))
        if theirs is not None and i in ref_at:
            pair.append((reference, theirs))
        if i % 2:
            pair.reverse()  # alternate which side goes first
        for fn, side in pair:
            side.times.append(_time(fn, side.number))
    return mine, theirs, cut
