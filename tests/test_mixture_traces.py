"""The slider path's Cox traces (exact polynomials along each line, kernel_core/model/_mixture_traces.py) on a
constrained region with pseudo-components and a process factor: every point of every trace is checked against
statsmodels OLS without an intercept on hand-written columns (``get_prediction``: mean, CI and PI), at blends
written out by hand from the Cox direction x_j = r_j (T - t) / (T - r_i) (Cox 1971, Biometrika 58, 155-159) and
the L-pseudo-components z = (x - L) / (T - sum L) (McLean & Anderson 1966). Invented, seeded response (the
statsmodels reference is the check)."""

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm

import levelwise as lw

LOWS = np.array([10.0, 20.0, 5.0])  # percent; total 100, and the constraint A + B <= 80


def columns(z, temp):
    """Scheffé quadratic in pseudo-components, plus each linear blending term times the coded temperature."""
    return np.column_stack([z[:, 0], z[:, 1], z[:, 2], z[:, 0] * z[:, 1], z[:, 0] * z[:, 2], z[:, 1] * z[:, 2],
                            z[:, 0] * temp, z[:, 1] * temp, z[:, 2] * temp])


@pytest.fixture(scope="module")
def case():
    comps = [lw.Component("A", 10, 70, "%"), lw.Component("B", 20, 60, "%"), lw.Component("C", 5, 50, "%")]
    mixture = lw.Mixture(comps, total=100, constraints=["A + B <= 80"])
    rng = np.random.default_rng(7)
    blends = mixture.sample(40, rng)
    temp = rng.uniform(20, 40, len(blends))
    z = (blends - LOWS) / (100 - LOWS.sum())
    coded = (temp - 30) / 10
    y = columns(z, coded) @ [5, 8, 3, 4, -6, 2, 1.5, -1, 0.5] + rng.normal(0, 0.2, len(blends))  # invented
    data = pd.DataFrame(blends, columns=["A", "B", "C"]).assign(Temp=temp, y=y)
    fit = lw.fit_mixture(data, "y", "A + B + C + A:B + A:C + B:C + A:Temp + B:Temp + C:Temp", mixture,
                         process=[lw.Factor("Temp", 20, 40, "°C")], pseudo=True)
    ref = sm.OLS(y, columns(z, coded)).fit()
    return fit, ref


def test_slider_traces_on_a_constrained_pseudo_component_region_match_statsmodels(case):
    fit, ref = case
    settings = {"A": 40.0, "B": 30.0, "C": 30.0, "Temp": 33.0}
    out = fit.refresh(settings, points=9)
    r = np.array([40.0, 30.0, 30.0])
    for i, name in enumerate("ABC"):
        tr = out["traces"][name]
        t = tr["amount"]
        # By hand: x_i = t, x_j = r_j (100 - t) / (100 - r_i); t spans what the bounds and A + B <= 80 allow.
        blends = np.array([[tt if j == i else r[j] * (100 - tt) / (100 - r[i]) for j in range(3)] for tt in t])
        assert tr["blends"] == pytest.approx(blends, abs=1e-9)
        assert tr["x"] == pytest.approx((t - r[i]) / 100, abs=1e-12)
        assert (blends >= LOWS - 1e-9).all() and (blends[:, 0] + blends[:, 1] <= 80 + 1e-9).all()
        z = (blends - LOWS) / (100 - LOWS.sum())
        frame = ref.get_prediction(columns(z, np.full(len(t), 0.3))).summary_frame(alpha=0.05)
        assert tr["mean"] == pytest.approx(frame["mean"].to_numpy(), rel=1e-9, abs=1e-9)
        assert tr["ci_half"] == pytest.approx((frame["mean_ci_upper"] - frame["mean"]).to_numpy(), rel=1e-9)
        assert tr["pi_half"] == pytest.approx((frame["obs_ci_upper"] - frame["mean"]).to_numpy(), rel=1e-9)
    # The A + B <= 80 constraint ends A's trace: at its top A + B = 80 exactly.
    top = out["traces"]["A"]["blends"][-1]
    assert top[0] + top[1] == pytest.approx(80.0, abs=1e-9)
    z0 = (r - LOWS) / (100 - LOWS.sum())
    point = ref.get_prediction(columns(z0[None, :], np.array([0.3]))).summary_frame(alpha=0.05).iloc[0]
    assert out["point"]["mean"] == pytest.approx(point["mean"], rel=1e-9)
    assert out["point"]["pi_high"] == pytest.approx(point["obs_ci_upper"], rel=1e-9)
