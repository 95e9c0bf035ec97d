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


def interleaved_group(functions: dict, *, repeats: int, limited: dict | None = None, min_sample: float = 0.005,
                      budget: float = float("inf"), slow: float = 0.5):
    """Time several callables in turn, repeat by repeat, rotating which goes first.

    Parameters
    ----------
    functions : dict of str -> callable
        Zero-argument callables, timed in rotation.
    repeats : int
        Samples of each.
    limited : dict of str -> int, optional
        Fewer samples for a very slow callable, spread evenly over the repeats.
    min_sample, budget, slow
        As in :func:`interleaved`.

    Returns
    -------
    (dict of str -> Samples, bool)
        The samples per name, and whether the budget cut the repeats short.
    """
    start = time.perf_counter()
    limited = limited or {}
    names = list(functions)
    samples, due = {}, {}
    for name in names:
        side = samples[name] = Samples()
        side.number, warm = _calibrate(functions[name], min_sample, slow)
        wanted = max(1, min(repeats, limited.get(name, repeats)))
        if warm is not None:
            side.times.append(warm)
            wanted -= 1
        due[name] = set(np.linspace(0, repeats - 1, wanted).round().astype(int).tolist()) if wanted > 0 else set()
    cut = False
    for i in range(repeats):
        if i >= 3 and time.perf_counter() - start > budget:
            cut = True
            break
        turn = names[i % len(names):] + names[:i % len(names)]  # rotate which side goes first
        for name in turn:
            if i in due[name]:
                samples[name].times.append(_time(functions[name], samples[name].number))
    return samples, cut


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
    functions = {"ours": ours} if reference is None else {"ours": ours, "reference": reference}
    limited = {} if reference_repeats is None else {"reference": reference_repeats}
    samples, cut = interleaved_group(functions, repeats=repeats, limited=limited, min_sample=min_sample,
                                     budget=budget, slow=slow)
    return samples["ours"], samples.get("reference"), cut
