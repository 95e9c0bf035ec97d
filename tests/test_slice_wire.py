"""What a slider event sends for the surface slice stays faithful to the drawing: contour lines from a thinned grid
and with their float32 mantissa cut lie on the model's contours to well under a pixel."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

import levelwise as lw
from levelwise import demo, slice_grid
from levelwise.widgets.surface_slice import contour_paths, drawn


@pytest.mark.parametrize("held", [0.2, 0.5, 0.9])
def test_contour_lines_lie_on_the_models_contours(held):
    fit = lw.fit(demo.demo_data(), "Impact", demo.MODEL, factors=list(demo.FACTORS))
    factors = {f.name: f for f in demo.FACTORS}
    xn, yn = demo.FACTORS[0].name, demo.FACTORS[1].name
    settings = {f.name: f.low + held * (f.high - f.low) for f in demo.FACTORS}
    grid = slice_grid(fit, xn, yn, settings, shape=(100, 100))
    levels = list(np.linspace(np.nanmin(grid["mean"]), np.nanmax(grid["mean"]), 10)[1:-1])
    cx, cy, _ = contour_paths(grid["x"], grid["y"], grid["mean"], levels)
    ok = np.isfinite(cx)
    assert ok.sum() > 50

    def mean_at(dx=0.0, dy=0.0):
        table = {name: np.full(ok.sum(), value) for name, value in settings.items()}
        table[xn] = cx[ok].astype(float) + dx
        table[yn] = cy[ok].astype(float) + dy
        return fit.predict(pd.DataFrame(table))["mean"].to_numpy()

    # Distance of each vertex from the nearest level's contour, in units of the axis ranges: |z - level| / |grad z|.
    h = 1e-4
    z = mean_at()
    gx = (mean_at(dx=h * (factors[xn].high - factors[xn].low)) - z) / h
    gy = (mean_at(dy=h * (factors[yn].high - factors[yn].low)) - z) / h
    off = np.min(np.abs(z[:, None] - np.array(levels)[None, :]), axis=1) / np.hypot(gx, gy)
    assert off.max() < 1e-3  # a pixel on a 1000-pixel axis


@pytest.mark.parametrize("low, high", [(170.0, 210.0), (0.5, 1.5), (1000.0, 1001.0), (-3.0, 3.0)])
def test_drawn_coordinates_lose_at_most_a_4096th_of_the_axis(low, high):
    values = np.linspace(low, high, 997)
    cut = drawn(values, low, high)
    assert cut.dtype == np.float32
    assert np.max(np.abs(cut.astype(float) - values)) <= (high - low) / 4096
    with_nan = drawn(np.array([low, np.nan, high]), low, high)
    assert np.isnan(with_nan[1]) and np.isfinite(with_nan[[0, 2]]).all()
