"""Exclusions and inclusions of runs by rank-one updates of a :class:`~levelwise.Fit`.

Runs are named by run id (``Fit.runs``). The new fit shares every array with its parent and changes
only the positions in use, ``[R^-1 | beta]`` (one fused rank-one product) and, when no digits
cancel, the residual sum of squares (``SSE - e^2 / (1 - h)``, Belsley, Kuh & Welsch 1980).
"""

from __future__ import annotations

import math

import numpy as np
from scipy.linalg.blas import dger as _rank_one

from .._errors import LevelwiseError, describe
from ._inputs import _read_only


def exclude(fit, run, reason: str):
    """``fit.exclude(run, reason)``: a new Fit without run id *run*."""
    if not isinstance(reason, str) or not (stated := reason.strip()):
        raise LevelwiseError(
            f"The 'reason' parameter of exclude must be a non-empty text saying why run {run!r} is "
            f"left out. Got {describe(reason)} instead."
        )
    i = fit._position(run)
    if i is None:
        raise LevelwiseError(
            f"The 'run' parameter of exclude must be a run id of this fit {list(fit.runs)[:20]}. "
            f"Got {describe(run)} instead."
        )
    n, p = fit.n, len(fit.spec.terms)
    if n - 1 < p:
        raise LevelwiseError(
            f"Run {run!r} cannot be excluded: the model has {p} terms and only {n - 1} runs would remain."
        )
    every = fit._ordinals
    ordinal = every.item(i)
    rinv_beta = fit._rinv_beta
    # ndarray.dot on 1-d operands calls BLAS directly (``@`` goes through the generalised ufunc machinery,
    # about twice the fixed cost on arrays this small).
    both = fit.X_all[ordinal].dot(rinv_beta)  # x R^-1, then the fitted value x beta
    v = both[:-1]
    h = float(v.dot(v))
    if h > 1.0 - 1e-10:
        raise LevelwiseError(
            f"Run {run!r} cannot be excluded: its leverage is 1, so without it at least one term of the "
            "model could not be estimated. Drop a term or keep the run."
        )
    e = fit.y_all.item(ordinal) - both.item(-1)
    cx = fit.rinv.dot(v)
    a = (1.0 / math.sqrt(1.0 - h) - 1.0) / h if h > 0 else 0.5
    # [R^-1 | beta] in one rank-one update (BLAS dger, into a new array): R^-1 + a cx v' and beta - cx e / (1 - h)
    # (a > 0 for 0 <= h < 1, so the last entry can carry the factor 1 / a).
    both[-1] = -e / ((1.0 - h) * a)
    new_rb = _rank_one(a, cx, both, a=rinv_beta)
    new_rb.flags.writeable = False
    new = fit._replace(
        beta=new_rb[:, -1],
        rinv=new_rb[:, :-1],
        exclusions=fit.exclusions + ((run, stated),),
        _order=np.concatenate((every[:i], every[i + 1 :])),
    )
    values = new.__dict__
    values["_rinv_beta"] = new_rb
    # The residual sum of squares loses the run's deleted residual: SSE - e^2 / (1 - h)
    # (Belsley, Kuh & Welsch 1980). Kept only when no digits cancel; else recomputed on demand.
    sse = fit.sse
    smaller = sse - e * e / (1.0 - h)
    if smaller > 1e-6 * sse:
        values["sse"] = smaller
        values["s"] = math.sqrt(smaller / (n - 1 - p)) if n - 1 > p else float("nan")
    return new


def include(fit, run):
    """``fit.include(run)``: a new Fit with excluded run id *run* back in."""
    excluded = [label for label, _ in fit.exclusions]
    if run not in excluded:
        raise LevelwiseError(
            f"The 'run' parameter of include must be an excluded run {excluded}. Got {describe(run)} instead."
        )
    ordinal = fit._ordinal_of(run)
    x, y_run = fit.X_all[ordinal], fit.y_all[ordinal]
    v = fit.rinv.T @ x
    h = float(v @ v)
    e = y_run - x @ fit.beta
    cx = fit.rinv @ v
    beta = fit.beta + cx * e / (1.0 + h)
    a = (1.0 / np.sqrt(1.0 + h) - 1.0) / h if h > 0 else -0.5
    rinv = fit.rinv + a * np.outer(cx, v)
    i = int(np.searchsorted(fit._ordinals, ordinal))
    return fit._replace(
        beta=_read_only(beta),
        rinv=_read_only(rinv),
        exclusions=tuple(item for item in fit.exclusions if item[0] != run),
        _order=np.insert(fit._ordinals, i, ordinal),
    )
