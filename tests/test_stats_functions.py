"""levelwise._stats (no scipy.stats import) gives the numbers of scipy.stats, the reference library, and the
packages import without scipy.stats or jsonschema (a viewer's kernel loads neither for the published page)."""

from __future__ import annotations

import subprocess
import sys

import numpy as np
from scipy import stats

from levelwise._stats import f_sf, norm_ppf, norm_sf, t_ppf, t_sf

Q = np.array([0.5, 0.9, 0.975, 0.995, 1e-9])
DF = np.array([1.0, 3.5, 10.0, 1e6, np.inf])
X = np.array([-3.0, 0.0, 0.2, 2.5, 40.0])


def test_same_numbers_as_scipy_stats():
    np.testing.assert_allclose(t_ppf(Q[:, None], DF[None, :]), stats.t.ppf(Q[:, None], DF[None, :]), rtol=1e-14)
    np.testing.assert_allclose(t_sf(X[:, None], DF[None, :]), stats.t.sf(X[:, None], DF[None, :]), rtol=1e-13)
    np.testing.assert_allclose(norm_ppf(Q), stats.norm.ppf(Q), rtol=1e-14)
    np.testing.assert_allclose(norm_sf(X), stats.norm.sf(X), rtol=1e-14)
    F = np.array([0.1, 1.0, 5.0, 300.0])
    np.testing.assert_allclose(f_sf(F[:, None], 2, DF[None, :4]), stats.f.sf(F[:, None], 2, DF[None, :4]), rtol=1e-13)
    assert t_ppf(0.975, 10) == stats.t.ppf(0.975, 10)  # 2.228 (t tables, common practice)


def test_least_squares_fits_need_neither_scipy_stats_nor_jsonschema():
    """Loading a study and fitting and predicting its least-squares responses (a generalised-linear response is
    fitted by statsmodels, which imports scipy.stats itself)."""
    code = ("import sys, levelwise, levelwise.widgets, levelwise.dashboards.present as p\n"
            "from levelwise.dashboards.study_source import open_study\n"
            "study = open_study('demo')\n"
            "fits = {r: study.fit(r) for r, spec in study.responses.items()\n"
            "        if r not in ('Impact', 'Panels') and getattr(spec, 'family', None) is None}\n"
            "[f.predict({x.name: x.center for x in study.factors}) for f in fits.values()]\n"
            "print(sorted(m for m in ('scipy.stats', 'jsonschema', 'statsmodels') if m in sys.modules))")
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=120)
    assert done.returncode == 0, done.stderr[-2000:]
    assert done.stdout.strip() == "[]"
