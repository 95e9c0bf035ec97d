"""Effects, Lenth's method and half-normal coordinates.

Published values: e-Handbook 5.6.1 (eddy-current probe 2^3 factorial, data file SPLETT3 in tests/data).
Formulas: Lenth (1989), "Quick and easy analysis of unreplicated factorials", Technometrics 31(4) 469-473.
"""

import itertools

import numpy as np
import pandas as pd
import pytest
from scipy import stats

from levelwise import Factor, LevelwiseError, effects, fit, half_normal, lenth

CODED = [Factor(name, -1, 1) for name in ("X1", "X2", "X3")]

# e-Handbook 5.6.1, the seven effects (= 2 x coefficient), printed to 4 decimals
PUBLISHED_EFFECTS = {
    "X1": 3.1025, "X2": -0.8675, "X2:X3": 0.2975, "X1:X3": 0.2475,
    "X3": 0.2125, "X1:X2:X3": 0.1425, "X1:X2": 0.1275,
}


@pytest.fixture(scope="module")
def eddy(data_dir):
    data = pd.read_csv(data_dir / "SPLETT3.csv")
    return fit(data, "Y", "X1*X2*X3", factors=CODED)


def lenth_by_hand(values, alpha=0.05):
    """Lenth (1989) formulas, written out independently of levelwise."""
    c = np.abs(np.asarray(values, dtype=float))
    m = len(c)
    s0 = 1.5 * np.median(c)  # Lenth 1989: s0 = 1.5 median|c_j|
    pse = 1.5 * np.median(c[c < 2.5 * s0])  # Lenth 1989: PSE = 1.5 median{|c_j| : |c_j| < 2.5 s0}
    d = m / 3  # Lenth 1989: d = m/3
    me = stats.t.ppf(1 - alpha / 2, d) * pse  # Lenth 1989: ME = t(0.975; d) PSE
    gamma = (1 + (1 - alpha) ** (1 / m)) / 2  # Lenth 1989: gamma = (1 + 0.95^(1/m)) / 2
    sme = stats.t.ppf(gamma, d) * pse  # Lenth 1989: SME = t(gamma; d) PSE
    return s0, pse, d, me, sme


def test_eddy_current_effects_as_published(eddy):
    result = effects(eddy)
    assert set(result.index) == set(PUBLISHED_EFFECTS)  # e-Handbook 5.6.1: 7 effects, intercept excluded
    for term, value in PUBLISHED_EFFECTS.items():
        assert result[term] == pytest.approx(value, abs=5e-5), term  # e-Handbook 5.6.1


def test_effects_leave_out_squared_terms(data_dir):
    data = pd.read_csv(data_dir / "IMPROVE-5_5_3_2_2.csv")
    result = effects(fit(data, "Y1", "full_second_order", factors=[Factor(c, -1, 1) for c in ("X1", "X2", "X3")]))
    # common practice: effects are defined for two-level terms only (not for x^2 terms nor the intercept)
    assert list(result.index) == ["X1", "X2", "X3", "X1:X2", "X1:X3", "X2:X3"]


def test_lenth_on_eddy_current(eddy):
    result = lenth(eddy)
    published = list(PUBLISHED_EFFECTS.values())  # e-Handbook 5.6.1 effects
    s0, pse, d, me, sme = lenth_by_hand(published)
    # Published effects carry 4 decimals, so agreement is to rounding of the printed effects.
    assert result.s0 == pytest.approx(s0, abs=1e-4)  # Lenth 1989 formula on e-Handbook 5.6.1 effects
    assert result.pse == pytest.approx(pse, abs=1e-4)  # Lenth 1989 formula on e-Handbook 5.6.1 effects
    # Lenth 1989 by hand: s0 = 1.5 * .2475; the six |c| < 2.5 s0 have median (.2125 + .2475)/2 = .23
    assert result.pse == pytest.approx(1.5 * 0.23, abs=1e-4)
    assert result.d == pytest.approx(7 / 3)  # Lenth 1989: d = m/3, m = 7
    assert result.me == pytest.approx(me, rel=1e-4)  # Lenth 1989 ME with scipy.stats.t
    assert result.sme == pytest.approx(sme, rel=1e-4)  # Lenth 1989 SME with scipy.stats.t
    # e-Handbook 5.6.1 conclusions: X1 clearly active; X1 and X2 the important factors.
    assert "X1" in result.active
    assert set(result.active) <= {"X1", "X2"}


def test_lenth_on_a_saturated_two_to_the_four():
    # A second case: an invented, seeded unreplicated 2^4 with three active effects.
    rng = np.random.default_rng(20261201)
    grid = np.array(list(itertools.product([-1.0, 1.0], repeat=4)))
    data = pd.DataFrame(grid, columns=list("ABDE"))
    data["y"] = 10 + 3 * data.A - 2 * data.B + 1.5 * data.A * data.E + rng.normal(0, 0.3, 16)
    result = lenth(fit(data, "y", "A*B*D*E"), alpha=0.05)
    # Effects by the contrast rule: mean at + minus mean at - of each product column (common practice).
    by_hand = {}
    for size in range(1, 5):
        for combo in itertools.combinations("ABDE", size):
            sign = np.prod(data[list(combo)].to_numpy(), axis=1)
            by_hand[":".join(combo)] = data.y[sign > 0].mean() - data.y[sign < 0].mean()
    assert result.effects.to_dict() == pytest.approx(by_hand, abs=1e-12)  # contrast rule, common practice
    s0, pse, d, me, sme = lenth_by_hand(list(by_hand.values()))
    assert result.s0 == pytest.approx(s0, rel=1e-12)  # Lenth 1989 formula
    assert result.pse == pytest.approx(pse, rel=1e-12)  # Lenth 1989 formula
    assert result.d == pytest.approx(5.0)  # Lenth 1989: d = m/3, m = 15
    assert result.me == pytest.approx(me, rel=1e-12)  # Lenth 1989 ME, scipy.stats.t
    assert result.sme == pytest.approx(sme, rel=1e-12)  # Lenth 1989 SME, scipy.stats.t
    assert set(result.active_simultaneous) == {"A", "B", "A:E"}  # the invented active effects
    # alpha changes the margins: at alpha = 0.2 the ME uses t(0.9; d) (Lenth 1989 formula)
    wider = lenth(fit(data, "y", "A*B*D*E"), alpha=0.2)
    assert wider.me == pytest.approx(lenth_by_hand(list(by_hand.values()), 0.2)[3], rel=1e-12)


def test_half_normal_coordinates(eddy):
    table = half_normal(eddy)
    published = sorted(abs(v) for v in PUBLISHED_EFFECTS.values())  # e-Handbook 5.6.1 effects
    assert table["abs_effect"].to_numpy() == pytest.approx(published, abs=5e-5)
    assert list(table["term"][-2:]) == ["X2", "X1"]  # e-Handbook 5.6.1: the two largest effects
    m = 7
    positions = (np.arange(1, m + 1) - 0.5) / m  # plotting position (i - 0.5)/m, common practice
    assert table["position"].to_numpy() == pytest.approx(positions)
    # half-normal quantile: Phi^-1(0.5 + p/2) with the normal quantile from scipy.stats.norm
    assert table["quantile"].to_numpy() == pytest.approx(stats.norm.ppf(0.5 + positions / 2), rel=1e-12)


def test_saturated_fit_still_gives_lenth_and_half_normal(eddy):
    assert eddy.df_resid == 0
    assert np.isfinite(lenth(eddy).pse)
    assert len(half_normal(eddy)) == 7  # e-Handbook 5.6.1: 7 effects


def test_lenth_bad_input(eddy, data_dir):
    with pytest.raises(LevelwiseError, match="'alpha'.*open interval"):
        lenth(eddy, alpha=1.5)
    data = pd.read_csv(data_dir / "SPLETT3.csv")
    with pytest.raises(LevelwiseError, match="at least 3 effects"):
        lenth(fit(data, "Y", "X1 + X2", factors=CODED))
    natural = data.assign(X1=data.X1 * 10 + 100)
    with pytest.raises(LevelwiseError, match="coded units"):
        effects(fit(natural, "Y", "X1 + X2", coding="none"))
