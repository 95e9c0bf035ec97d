"""The response scale of a GLM fit: inverse links and the slider path.

The prediction engine works on the link scale (log-odds, probit or log rate). Every band shown on the response
scale is the link-scale mean -/+ the half-width, transformed by the inverse link, so it stays inside (0, 1) for a
probability and above 0 for a rate. :func:`refresh` is the one-call slider path of ``GlmFit.refresh``: it asks
the engine's exact trace polynomials for the (factors, points) arrays of every trace at once and transforms
them in one stacked call.
"""

from __future__ import annotations

import math

import numpy as np
from scipy import special

from ._engine import slice_pair
from ._settings import check_points

_SQRT_2PI = math.sqrt(2.0 * math.pi)
_SIGNS = np.array([0.0, -1.0, 1.0])  # the mean, then the lower and upper ends of a band


def inverse_link(link, eta, out=None):
    """Probability (logit, probit) or rate (log) from the link-scale value(s) *eta*."""
    if link == "logit":
        return special.expit(eta, out=out)
    if link == "probit":
        return special.ndtr(eta, out=out)
    with np.errstate(over="ignore"):  # a rate beyond the float range is inf
        return np.exp(eta, out=out)


def inverse_link_scalar(link, eta: float) -> float:
    """:func:`inverse_link` of one float (no array machinery: the slider's point)."""
    if link == "logit":
        return 1.0 / (1.0 + math.exp(-eta)) if eta >= 0 else math.exp(eta) / (1.0 + math.exp(eta))
    if link == "probit":
        return 0.5 * math.erfc(-eta / math.sqrt(2.0))
    return math.exp(eta) if eta < 709.0 else math.inf


def dmu_deta(link, eta):
    """Derivative of the inverse link at *eta*."""
    if link == "logit":
        p = special.expit(eta)
        return p * (1.0 - p)
    if link == "probit":
        return np.exp(-0.5 * np.square(eta)) / _SQRT_2PI
    return np.exp(eta)


def transform(link, eta, half) -> dict:
    """Link-scale mean -/+ *half*, transformed: ``mean``, ``ci_low``, ``ci_high`` and ``link_mean``."""
    eta = np.asarray(eta, dtype=float)
    stacked = np.multiply.outer(_SIGNS, half)  # 0, -half, +half
    stacked += eta
    stacked[0] = eta  # exact even where half is not finite
    inverse_link(link, stacked, out=stacked)
    return {"mean": stacked[0], "ci_low": stacked[1], "ci_high": stacked[2], "link_mean": eta}


def transform_point(link, point: dict) -> dict:
    """The engine's link-scale point (``mean``, ``ci_high``) on the response scale."""
    eta = point["mean"]
    half = point["ci_high"] - eta
    return {"mean": inverse_link_scalar(link, eta), "ci_low": inverse_link_scalar(link, eta - half),
            "ci_high": inverse_link_scalar(link, eta + half), "link_mean": eta,
            "pi_low": math.nan, "pi_high": math.nan,  # no interval for one new count (GlmFit.new_observation_note)
            "extrapolated": point["extrapolated"]}


def refresh(fit, settings, level=None, points=50, slice_axes=None, shape=(100, 100), point=True) -> dict:
    """One slider event of a GLM fit (see ``Fit.refresh``) on the response scale; no prediction interval."""
    engine, link = fit.engine, fit.link
    plan = engine.plan
    if plan is None:  # categorical factors: the engine's model-row path, then the same transform
        out = engine.refresh(settings, level, points, slice_axes, shape, point)
        if out["point"] is not None:
            out["point"] = transform_point(link, out["point"])
        if out["traces"] is not None:
            out["traces"] = {name: {"x": c["x"], **transform(link, c["mean"], c["ci_half"])}
                             for name, c in out["traces"].items()}
    else:
        natural = engine.vector(settings)
        level = engine._level(level)
        out = {"point": None, "traces": None, "slice": None}
        if points is not None and point:  # the point and every trace from one chain of products, one inverse link
            xs, eta, h = plan.event(natural, check_points(points))
            powers = plan.powers(natural) if slice_axes is not None else None
            np.maximum(h, 0.0, out=h)  # a sum of squares; clip rounding below zero
            h0 = h.item(-1)
            half = np.sqrt(h, out=h)
            half *= engine._scale(level)
            bands = np.empty((3, len(eta)))  # the mean, lower and upper ends, one inverse link for all
            bands[0] = eta
            np.subtract(eta, half, out=bands[1])
            np.add(eta, half, out=bands[2])
            inverse_link(link, bands, out=bands)
            mean, low, high = bands[:, -1].tolist()
            out["point"] = {"mean": mean, "ci_low": low, "ci_high": high, "link_mean": eta.item(-1),
                            "pi_low": math.nan, "pi_high": math.nan,  # see GlmFit.new_observation_note
                            "extrapolated": engine.outside_one(natural, h0)}
            k = engine.k  # the traces without the setting's column (see plan.event); the names go first in the
            bands = bands[:, :-1].reshape(3, k, -1)  # zip, so that no array is iterated past its end
            out["traces"] = {name: {"x": x, "mean": m, "ci_low": lo, "ci_high": hi, "link_mean": e}
                             for name, x, e, m, lo, hi in zip(engine.factor_names, xs, eta[:-1].reshape(k, -1),
                                                                bands[0], bands[1], bands[2])}
        else:
            powers = plan.powers(natural)
            if point:
                out["point"] = transform_point(link, engine.point(None, level, natural, powers))
            if points is not None:
                xs, mean, ci, _ = plan.traces(powers, engine._scale(level), check_points(points), engine.extra,
                                              pi=False)
                bands = transform(link, mean, ci)  # (k, points) each, one stacked inverse link
                out["traces"] = {name: {"x": xs[j], "mean": bands["mean"][j], "ci_low": bands["ci_low"][j],
                                        "ci_high": bands["ci_high"][j], "link_mean": mean[j]}
                                 for j, name in enumerate(engine.factor_names)}
        if slice_axes is not None:
            x, y = slice_pair(slice_axes)
            out["slice"] = engine.slice(x, y, None, shape, level, base=natural, powers=powers)
    if out.get("slice") is not None:
        sl = out["slice"]
        out["slice"] = {"x": sl["x"], "y": sl["y"], **transform(link, sl["mean"], sl["ci_half"])}
    return out
