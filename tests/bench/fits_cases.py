"""Benchmark cases of the split-plot (REML) and GLM fits (issues 13, 15). Invented, seeded data."""

from __future__ import annotations

import warnings

import numpy as np

from .rows import make_row, unavailable
from .timing import interleaved

SEED = 20261202


def case_splitplot(cfg) -> list[dict]:
    """REML fit of a 48-run, 12-whole-plot split plot against the same statsmodels MixedLM fit alone."""
    import levelwise as lw

    name = "12. REML split-plot fit, 48 runs in 12 whole plots, vs statsmodels MixedLM alone"
    if not hasattr(lw, "MixedFit"):
        return [unavailable("reml_split_plot", name, kind="overhead", goal="<= 1.2x", goal_value=1.2,
                            status="not available (feature missing: lw.fit(..., whole_plot=))")]
    from statsmodels.regression.mixed_linear_model import MixedLM

    factors = [lw.Factor("A", -1, 1, hard_to_change=True), lw.Factor("B", -1, 1, hard_to_change=True),
               lw.Factor("C", -1, 1), lw.Factor("D", -1, 1)]
    design = lw.full_factorial(factors, replicates=3, seed=SEED)
    frame = design.table.copy()
    rng = np.random.default_rng(SEED)
    wp = frame["whole_plot"].to_numpy()
    a, b, c, d = (frame[k].to_numpy() for k in "ABCD")
    frame["y"] = (10 + 2 * a - b + 1.5 * c + 0.5 * a * c + rng.normal(0, 1.2, wp.max() + 1)[wp]
                  + rng.normal(0, 1.0, len(frame)))
    model = "(A + B + C + D)**2"
    x = lw.least_squares(frame, "y", model, factors=factors).X
    y = frame["y"].to_numpy()

    def ours():
        return lw.fit(frame, "y", model, factors=factors, whole_plot="whole_plot").beta

    def reference():
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            return MixedLM(y, x, groups=wp).fit(reml=True).fe_params

    diff = float(np.max(np.abs(ours() - reference())))
    t_ours, t_ref, cut = interleaved(ours, reference, repeats=cfg.repeats, min_sample=cfg.min_sample,
                                     budget=cfg.budget)
    note = ("ours: lw.fit(DataFrame, whole_plot=) - validation, coding, model matrix, MixedLM REML, GLS by "
            "Cholesky whitening, strata df; reference: statsmodels MixedLM(y, X, groups).fit(reml=True) on a "
            "prebuilt model matrix")
    return [make_row("reml_split_plot", name, kind="overhead", goal="<= 1.2x", goal_value=1.2,
                     ours=t_ours.median, reference=t_ref.median, ours_repeats=len(t_ours.times),
                     reference_repeats=len(t_ref.times), note=note + (" (time budget cut repeats)" if cut else ""),
                     max_abs_diff=diff)]
