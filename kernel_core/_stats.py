"""The few distribution functions the fits, tables and views need, without importing ``scipy.stats``.

``scipy.stats`` costs a served viewer's kernel about 23 MB of memory and most of a second to import, and the
page needs only t, F and normal quantiles and tail areas. These are the same ``scipy.special`` functions
``scipy.stats`` evaluates for them (``t.ppf`` is ``stdtrit``, ``t.sf(x)`` is ``stdtr(df, -x)``, ``f.sf`` is
``fdtrc``, ``norm.ppf`` is ``ndtri``, ``norm.sf(x)`` is ``ndtr(-x)``); ``tests/test_stats_functions.py`` checks
them against ``scipy.stats``. Anything else goes through :data:`stats`, which imports ``scipy.stats`` on first use.
"""

from __future__ import annotations

import numpy as np
from scipy import special


def t_ppf(q, df):
    """Quantile of Student's t with *df* degrees of freedom (``scipy.stats.t.ppf``)."""
    return special.stdtrit(df, q)


def t_sf(x, df):
    """Upper tail area of Student's t (``scipy.stats.t.sf``)."""
    return special.stdtr(df, -np.asarray(x, dtype=float))


def f_sf(f, dfn, dfd):
    """Upper tail area of the F distribution (``scipy.stats.f.sf``)."""
    return special.fdtrc(dfn, dfd, f)


def norm_ppf(q):
    """Standard normal quantile (``scipy.stats.norm.ppf``)."""
    return special.ndtri(q)


def norm_sf(x):
    """Standard normal upper tail area (``scipy.stats.norm.sf``)."""
    return special.ndtr(-np.asarray(x, dtype=float))


class _LazyStats:
    """``scipy.stats``, imported when an attribute is first asked for."""

    def __getattr__(self, name):
        from scipy import stats as module

        return getattr(module, name)


#: ``scipy.stats`` on demand (rarer distributions: noncentral t, half-normal, ranks, Box-Cox).
stats = _LazyStats()
