"""Kernel benchmark case 7: one slider event on a mixture fit (issue 12).

A 4-component Scheffé special cubic (14 terms) fitted to a {4, 3} simplex lattice plus 6 replicated blends (26
runs) with an invented, seeded response. Ours: ``MixtureFit.refresh(blend, points=50)`` (the point and every
component's Cox-direction trace, 4 x 50 blends). Reference: statsmodels OLS ``get_prediction`` on the Scheffé
columns at the same 201 blends (point + 4 traces), as in case 1.
"""

from __future__ import annotations

import itertools

import numpy as np
import pandas as pd

from .rows import make_row, unavailable
from .timing import interleaved_group

SEED = 20261212
LEVEL = 0.95


def special_cubic_rows(x: np.ndarray) -> np.ndarray:
    """Scheffé special-cubic columns written out by hand in numpy."""
    q = x.shape[1]
    cols = [x[:, i] for i in range(q)]
    cols += [x[:, i] * x[:, j] for i, j in itertools.combinations(range(q), 2)]
    cols += [x[:, i] * x[:, j] * x[:, k] for i, j, k in itertools.combinations(range(q), 3)]
    return np.column_stack(cols)


def case_mixture_refresh(cfg) -> list[dict]:
    import statsmodels.api as sm

    import levelwise as lw

    if not hasattr(lw, "fit_mixture"):
        return [unavailable("mixture_refresh_vs_statsmodels", "7. mixture slider event vs statsmodels",
                            kind="speedup", goal=">= 50x", goal_value=50.0,
                            status="not available (feature missing: levelwise.fit_mixture)")]
    comps = [lw.Component(n) for n in "ABCD"]
    design = lw.simplex_lattice(comps, 3, randomize=False)
    data = design.table[list("ABCD")].copy()
    data = pd.concat([data, data.iloc[:6]], ignore_index=True)
    rng = np.random.default_rng(SEED)
    # Invented truth (describes no real mixture) plus seeded noise.
    data["y"] = 10 + 3 * data.A - 2 * data.C + 8 * data.A * data.B + 20 * data.A * data.B * data.C \
        + rng.normal(0, 0.3, len(data))
    fitted = lw.fit_mixture(data, "y", "scheffe_special_cubic", comps)
    blend = {"A": 0.4, "B": 0.3, "C": 0.2, "D": 0.1}
    result = sm.OLS(data["y"].to_numpy(), special_cubic_rows(data[list("ABCD")].to_numpy())).fit()
    first = fitted.refresh(blend, points=50)
    grids = [np.array([[blend[n] for n in "ABCD"]])] + [first["traces"][n]["blends"] for n in "ABCD"]

    def ours():
        return fitted.refresh(blend, points=50)

    def reference():
        return [result.get_prediction(special_cubic_rows(g)).summary_frame(alpha=1 - LEVEL) for g in grids]

    theirs = reference()
    diff = abs(first["point"]["pi_high"] - theirs[0]["obs_ci_upper"].iloc[0])
    for name, frame in zip("ABCD", theirs[1:]):
        tr = first["traces"][name]
        diff = max(diff, float(np.max(np.abs(tr["mean"] - frame["mean"].to_numpy()))),
                   float(np.max(np.abs(tr["pi_half"] - (frame["obs_ci_upper"] - frame["mean"]).to_numpy()))))
    timed, cut = interleaved_group({"ours": ours, "statsmodels": reference}, repeats=cfg.repeats,
                                   min_sample=cfg.min_sample, budget=cfg.budget)
    a, b = timed["ours"], timed["statsmodels"]
    return [make_row("mixture_refresh_vs_statsmodels",
                     "7. mixture slider event, point + 4 Cox traces x 50, vs statsmodels get_prediction",
                     kind="speedup", goal=">= 50x", goal_value=50.0, ours=a.median, reference=b.median,
                     ours_repeats=len(a.times), reference_repeats=len(b.times),
                     note="4-component Scheffé special cubic (p = 14), 26 runs; ours: MixtureFit.refresh(blend, "
                          "points=50)" + (" (time budget cut repeats)" if cut else ""),
                     max_abs_diff_point_traces=diff)]
