"""Lighter viewers (issue 17, item 5): the heat map is sent only when the slice changes, as at most 10 KB for
100 x 100 (one uint8 code a cell), with a colour axis that keeps the quantity's own numbers."""

from __future__ import annotations

import numpy as np
import pytest

pytest.importorskip("bqplot")

from widget_support import browser_update, install_recording_comm, message_bytes  # noqa: E402

from levelwise import demo  # noqa: E402
from levelwise.widgets import FactorSliders, SharedModel, SurfaceSlice  # noqa: E402
from levelwise.widgets.surface_slice import CODES, decode, quantise  # noqa: E402


def demo_shared():
    data = demo.demo_data()
    return SharedModel(demo.FACTORS, data, responses=["Impact"], models={"Impact": demo.MODEL},
                       units={"Impact": "J"}, design=demo.demo_design())


def heatmap_messages(log, heatmap):
    """(JSON bytes + buffer bytes) of each recorded message that carries the heat map's colour array."""
    out = []
    for data, buffers in log:
        if "color" in data.get("state", {}) and any("color" in p for p in data.get("buffer_paths", [])):
            out.append(message_bytes([(data, buffers)]))
    return out


def test_quantise_round_trip_within_half_a_step():
    z = np.linspace(-3.0, 5.0, 10_000).reshape(100, 100) ** 3  # a curved surface
    codes, low, high = quantise(z)
    assert codes.dtype == np.uint8 and codes.nbytes == 10_000
    assert (low, high) == (z.min(), z.max())
    assert codes.min() == 0 and codes.max() == CODES
    assert np.abs(decode(codes, low, high) - z).max() <= (high - low) / CODES / 2 * 1.0001
    z[3, 4] = np.nan
    codes, low, high = quantise(z)
    assert codes[3, 4] == CODES + 1 and np.isnan(decode(codes, low, high)[3, 4])


def test_a_slider_event_that_does_not_change_the_slice_sends_no_heat_map(monkeypatch):
    log = install_recording_comm(monkeypatch)
    shared = demo_shared()
    sliders, surface = FactorSliders(shared), SurfaceSlice(shared)  # 100 x 100
    surface.flush()
    x, y = surface.x_factor.value, surface.y_factor.value
    for value in (shared.factor(x).low, shared.factor(x).high, (shared.factor(x).low + shared.factor(x).high) / 2):
        log.clear()
        browser_update(sliders.sliders[x], value=float(value))  # an axis factor: only the marker moves
        surface.flush()
        assert heatmap_messages(log, surface.heatmap) == []
        assert not any("color" in data.get("state", {}) for data, _ in log)
    held = next(f.name for f in shared.continuous_factors() if f.name not in (x, y))
    log.clear()
    browser_update(sliders.sliders[held], value=float(shared.factor(held).low))
    surface.flush()
    # the slice changed: the colour axis range is sent; the codes too unless the slice only shifted
    assert any({"min", "max"} <= set(data.get("state", {})) for data, _ in log)
    assert surface.redraws >= 2


def test_the_heat_map_for_100_by_100_is_at_most_10_kb(monkeypatch):
    log = install_recording_comm(monkeypatch)
    shared = demo_shared()
    surface = SurfaceSlice(shared)
    surface.flush()
    log.clear()
    surface.quantity.value = "pi_half"  # a different surface: the codes change
    surface.flush()
    sizes = heatmap_messages(log, surface.heatmap)
    assert len(sizes) == 1
    assert sizes[0] <= 10_240  # 10,000 bytes of codes plus the message's JSON
    assert np.asarray(surface.heatmap.color).shape == (100, 100)
    # the colour axis shows the quantity's own range, the heat map's scale the codes
    grid = surface._kernel_slice(shared.fit, surface.x_factor.value, surface.y_factor.value)["pi_half"]
    assert (surface.label_scale.min, surface.label_scale.max) == pytest.approx((np.nanmin(grid), np.nanmax(grid)))
    assert (surface.sc.min, surface.sc.max) == (0.0, float(CODES))
    assert surface.shown_values() == pytest.approx(grid, abs=(np.nanmax(grid) - np.nanmin(grid)) / CODES / 2 + 1e-12)


def test_bytes_per_slider_event_on_the_demo_workbench(monkeypatch, capsys):
    """Reported. A held factor that only shifts the surface (Film: a main effect in the demo model) sends no heat
    map: the uint8 codes are unchanged, only the colour axis's range moves; one that bends it (Catalyst, in the
    Oven:Catalyst interaction) sends one of at most 10 KB. The issue's goal of 8 KB a whole event is met by the
    first kind, not yet by the second (the contour lines and the heat map add up to about 18 KB)."""
    log = install_recording_comm(monkeypatch)
    shared = demo_shared()
    sliders, surface = FactorSliders(shared), SurfaceSlice(shared)
    surface.flush()
    x, y = surface.x_factor.value, surface.y_factor.value
    sizes, heat = {}, {}
    for held in [f.name for f in shared.continuous_factors() if f.name not in (x, y)]:
        f = shared.factor(held)
        sizes[held], heat[held] = [], []
        for k in range(1, 6):
            log.clear()
            browser_update(sliders.sliders[held], value=float(f.low + (f.high - f.low) * k / 6))
            surface.flush()
            sizes[held].append(message_bytes(log))
            heat[held] += heatmap_messages(log, surface.heatmap)
    with capsys.disabled():
        print(f"\n[bytes per held-factor slider event, demo workbench (sliders + 100x100 slice)] {sizes}; "
              f"heat maps sent: {heat}")
    assert heat["Film"] == [] and max(sizes["Film"]) <= 8_000  # the goal, met for a shift
    assert len(heat["Catalyst"]) == 5 and max(heat["Catalyst"]) <= 10_240
