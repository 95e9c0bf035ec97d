"""Box-Cox lambda by profile likelihood, against scipy.stats (reference library).

With an intercept-only model the profile likelihood is exactly the one scipy maximises in ``scipy.stats.boxcox``
(``boxcox_llf``), and scipy's ``boxcox(..., alpha=0.05)`` gives the same likelihood-ratio interval.
"""

import itertools

import numpy as np
import pandas as pd
import pytest
from scipy import stats

from levelwise import LevelwiseError, box_cox, fit


def test_intercept_only_model_matches_scipy():
    rng = np.random.default_rng(11)
    data = pd.DataFrame({"y": rng.gamma(3.0, 2.0, 30)})  # invented, seeded
    result = box_cox(fit(data, "y", "1"))
    _, lam, (low, high) = stats.boxcox(data["y"].to_numpy(), alpha=0.05)
    assert result.lam == pytest.approx(lam, abs=1e-6)  # scipy.stats.boxcox MLE (its optimiser tolerance)
    assert result.ci_low == pytest.approx(low, abs=1e-6)  # scipy.stats.boxcox, alpha=0.05 interval
    assert result.ci_high == pytest.approx(high, abs=1e-6)  # scipy.stats.boxcox, alpha=0.05 interval
    # the profile is scipy's log-likelihood (same constants)
    for value, llf in zip(result.profile["lambda"][::25], result.profile["llf"][::25]):
        assert llf == pytest.approx(stats.boxcox_llf(value, data["y"].to_numpy()), rel=1e-10)  # scipy boxcox_llf


def test_log_normal_response_suggests_the_logarithm():
    rng = np.random.default_rng(5)
    grid = np.array(list(itertools.product([-1.0, 1.0], repeat=3)) * 3)
    data = pd.DataFrame(grid, columns=["A", "B", "D"])
    # invented: log y is linear in the factors with normal noise, so lambda = 0 is the true power
    data["y"] = np.exp(2.0 + 0.9 * data.A - 0.6 * data.B + 0.3 * data.D + rng.normal(0, 0.15, len(data)))
    result = box_cox(fit(data, "y", "A + B + D"))
    assert result.ci_low < 0 < result.ci_high  # the log (lambda = 0) is inside the interval, common practice
    assert not result.ci_low <= 1 <= result.ci_high
    assert result.suggested_lambda == 0
    assert "logarithm" in result.suggestion
    # the interval ends are where the profile drops by chi2(0.95, 1)/2 (likelihood-ratio test, 1 df)
    profile = dict(zip(result.profile["lambda"], result.profile["llf"]))
    top = max(profile.values())
    cut = stats.chi2.ppf(0.95, 1) / 2
    inside = [v for v, llf in profile.items() if llf >= top - cut]
    assert min(inside) >= result.ci_low - 0.05 and max(inside) <= result.ci_high + 0.05


def test_normal_response_needs_no_transformation():
    rng = np.random.default_rng(8)
    grid = np.array(list(itertools.product([-1.0, 1.0], repeat=2)) * 4)
    data = pd.DataFrame(grid, columns=["A", "B"])
    data["y"] = 50 + 2 * data.A + rng.normal(0, 1.0, len(data))
    result = box_cox(fit(data, "y", "A + B"))
    assert result.ci_low <= 1 <= result.ci_high  # no transformation needed
    assert result.suggested_lambda == 1
    assert "No transformation" in result.suggestion


def test_non_positive_response_is_refused():
    data = pd.DataFrame({"A": [-1.0, 1, -1, 1, 0], "y": [1.0, 2.0, 0.0, 3.0, 2.0]})
    with pytest.raises(LevelwiseError, match="positive response.*'y'"):
        box_cox(fit(data, "y", "A"))
