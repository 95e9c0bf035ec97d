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


def _split_plot_frame():
    import levelwise as lw

    factors = [lw.Factor("A", -1, 1, hard_to_change=True), lw.Factor("B", -1, 1, hard_to_change=True),
               lw.Factor("C", -1, 1), lw.Factor("D", -1, 1)]
    frame = lw.full_factorial(factors, replicates=3, seed=SEED).table.copy()
    rng = np.random.default_rng(SEED)
    wp = frame["whole_plot"].to_numpy()
    a, b, c = (frame[k].to_numpy() for k in "ABC")
    frame["y"] = (10 + 2 * a - b + 1.5 * c + 0.5 * a * c + rng.normal(0, 1.2, wp.max() + 1)[wp]
                  + rng.normal(0, 1.0, len(frame)))
    return factors, frame


def _event_rows(fitted, point=(0.3, -0.5, 0.1, 0.8), points=50):
    """Model rows of one slider event: the point, then each factor's 50-point trace (as case_refresh)."""
    point = np.array([point])
    out = [fitted.engine.rows(point)]
    for j in range(point.shape[1]):
        grid = np.repeat(point, points, axis=0)
        grid[:, j] = np.linspace(-1.0, 1.0, points)
        out.append(fitted.engine.rows(grid))
    return out


def case_family_sliders(cfg) -> list[dict]:
    """One slider event (the point and every factor's 50-point trace, with intervals) on a split-plot and on a
    binomial fit, against statsmodels' prediction on the same model (GLS at the REML components; GLM) on
    prebuilt model rows, one get_prediction call per curve as in case_refresh."""
    import statsmodels.api as sm

    import levelwise as lw

    rows = []
    names = ("slider_split_plot", "13. slider event on the REML split-plot fit vs statsmodels GLS get_prediction")
    if not hasattr(lw, "MixedFit"):
        rows.append(unavailable(*names, kind="speedup", goal=">= 50x", goal_value=50.0,
                                status="not available (feature missing: split-plot fit)"))
    else:
        factors, frame = _split_plot_frame()
        model = "(A + B + C + D)**2"
        fitted = lw.fit(frame, "y", model, factors=factors, whole_plot="whole_plot")
        comps = fitted.variance_components
        wp = frame["whole_plot"].to_numpy()
        v = comps["residual"] * np.eye(len(frame)) + comps["whole_plot"] * (wp[:, None] == wp[None, :])
        gls = sm.GLS(frame["y"].to_numpy(), np.asarray(fitted.base.X), sigma=v).fit()
        settings = {"A": 0.3, "B": -0.5, "C": 0.1, "D": 0.8}
        batches = _event_rows(fitted)

        def ours():
            return fitted.refresh(settings, points=50)["point"]["mean"]

        def reference():
            out = [gls.get_prediction(x).summary_frame(alpha=0.05) for x in batches]
            return out[0]["mean"].iloc[0]

        diff = abs(ours() - reference())
        a, b, cut = interleaved(ours, reference, repeats=cfg.repeats, min_sample=cfg.min_sample, budget=cfg.budget)
        rows.append(make_row(*names, kind="speedup", goal=">= 50x", goal_value=50.0, ours=a.median,
                             reference=b.median, ours_repeats=len(a.times), reference_repeats=len(b.times),
                             note="ours: MixedFit.refresh(settings, points=50) - settings check, point and 4 traces "
                             "with CI and PI (both variance components); reference: statsmodels GLS results "
                             "get_prediction(rows).summary_frame() for the point and each trace, rows prebuilt"
                             + (" (cut)" if cut else ""),
                             max_abs_diff=float(diff)))
    names = ("slider_binomial", "14. slider event on a binomial (logit) fit vs statsmodels GLM get_prediction")
    if not hasattr(lw, "GlmFit"):
        rows.append(unavailable(*names, kind="speedup", goal=">= 50x", goal_value=50.0,
                                status="not available (feature missing: binomial fit)"))
        return rows
    factors, frame = _split_plot_frame()
    rng = np.random.default_rng(SEED + 1)
    frame["tested"] = 20
    eta = 0.5 + 0.8 * frame["A"] - 0.6 * frame["C"] + 0.3 * frame["A"] * frame["C"]
    frame["passed"] = rng.binomial(20, 1 / (1 + np.exp(-eta)))
    fitted = lw.fit(frame.drop(columns=["whole_plot"]), "passed", "(A + B + C + D)**2", factors=factors,
                    family="binomial", trials="tested")
    settings = {"A": 0.3, "B": -0.5, "C": 0.1, "D": 0.8}
    batches = _event_rows(fitted)
    result = fitted.statsmodels_result

    def ours_glm():
        return fitted.refresh(settings, points=50)["point"]["mean"]

    def reference_glm():
        out = [result.get_prediction(x).summary_frame(alpha=0.05) for x in batches]
        return out[0]["mean"].iloc[0]

    diff = abs(ours_glm() - reference_glm())
    a, b, cut = interleaved(ours_glm, reference_glm, repeats=cfg.repeats, min_sample=cfg.min_sample,
                            budget=cfg.budget)
    rows.append(make_row(*names, kind="speedup", goal=">= 50x", goal_value=50.0, ours=a.median, reference=b.median,
                         ours_repeats=len(a.times), reference_repeats=len(b.times),
                         note="ours: GlmFit.refresh(settings, points=50) - settings check, point and 4 traces, "
                         "link-scale CI transformed; reference: statsmodels GLM results get_prediction(rows)"
                         ".summary_frame() for the point and each trace, rows prebuilt" + (" (cut)" if cut else ""),
                         max_abs_diff=float(diff)))
    return rows
