"""What one slider event sends from the kernel (issue 17, "lighter viewers"), headless through a recording comm:
the readout goes out before any trace mark, a burst of slider values inside a running event loop pushes the
traces once with the latest settings, and the traces' y scale is not resent for a small move that its bands
still fit. The numbers drawn are the kernel's own (``Fit.trace``), as in test_widgets_headless.py."""

from __future__ import annotations

import asyncio

import numpy as np
import pytest

from levelwise import demo
from levelwise.widgets import FactorSliders, SharedModel, SurfaceSlice
from tests.widget_support import install_recording_comm


@pytest.fixture
def log(monkeypatch):
    return install_recording_comm(monkeypatch)


@pytest.fixture
def shared():
    return SharedModel(demo.FACTORS, demo.demo_data(), demo.RESPONSE, demo.MODEL, response_units="J")


def burst(shared, values):
    """Set Oven to each of *values* one after another inside a running event loop (as slider events arriving
    faster than the views draw), then let the loop run until the coalesced work has been done."""

    async def run():
        for value in values:
            shared.set_settings(Oven=value)
        await asyncio.sleep(0.2)

    asyncio.run(run())


def test_a_burst_of_slider_values_pushes_the_traces_once_with_the_latest_settings(log, shared, monkeypatch):
    view, surface = FactorSliders(shared), SurfaceSlice(shared)
    order = []
    for name, (pi_band, ci_band, mean, marker) in view._marks.items():
        for mark in (pi_band, ci_band, mean, marker):
            original = mark.comm.send
            monkeypatch.setattr(mark.comm, "send", lambda data=None, *a, _o=original, _n=name, **k: (
                order.append(("trace", _n)), _o(data, *a, **k))[1])
    original = view.readout.comm.send
    monkeypatch.setattr(view.readout.comm, "send", lambda data=None, *a, **k: (
        order.append(("readout", data["state"]["value"])), original(data, *a, **k))[1])
    order.clear()
    burst(shared, [196.0, 197.0, 198.5])
    assert shared.settings["Oven"] == 198.5
    # The traces of the factors other than Oven change with Oven; each mark is sent once for the burst.
    traces = [name for kind, name in order if kind == "trace"]
    per_factor = {name: traces.count(name) for name in set(traces)}
    # pi band, ci band, mean and marker: one message each for the whole burst (three events unbatched would
    # send each of them three times); Oven's own curve does not depend on Oven: only its marker moves.
    assert per_factor == {"Oven": 1, "Dwell": 4, "Film": 4, "Catalyst": 4}
    # Every event's readout was sent, all of them before the first trace mark.
    readouts = [i for i, (kind, _) in enumerate(order) if kind == "readout"]
    assert len(readouts) == 3 and readouts == [0, 1, 2]
    # What is drawn is the kernel's trace at the latest settings (float32 on the wire).
    curve = shared.fit.trace("Dwell", shared.settings, points=view.points)
    pi_band, ci_band, mean, marker = view._marks["Dwell"]
    assert np.asarray(mean.y) == pytest.approx(curve["mean"], rel=1e-6)
    assert np.asarray(ci_band.y)[0] == pytest.approx(curve["mean"] - curve["ci_half"], rel=1e-6)
    assert float(view._marks["Oven"][3].x[0]) == pytest.approx(198.5, rel=1e-6)
    assert float(surface.marker.x[0]) == pytest.approx(198.5, rel=1e-6)


def test_the_y_scale_is_kept_while_the_bands_fit_it(shared):
    view = FactorSliders(shared)
    before = (view.y_scale.min, view.y_scale.max)
    for name in ("Dwell", "Film", "Catalyst", "Oven"):  # small steps: every band stays inside the scale
        factor = shared.factor(name)
        shared.set_settings(**{name: shared.settings[name] + 0.02 * (factor.high - factor.low)})
        assert (view.y_scale.min, view.y_scale.max) == before
        for pi_band, ci_band, mean, _marker in view._marks.values():
            for mark in (pi_band, ci_band, mean):
                y = np.asarray(mark.y, dtype=float)
                assert before[0] <= y.min() and y.max() <= before[1]


def test_the_y_scale_follows_bands_that_leave_it_or_shrink(shared):
    view = FactorSliders(shared)
    view.y_scale.min, view.y_scale.max = -1e6, 1e6  # far wider than the bands: they fill under half of it
    shared.set_settings(Oven=shared.settings["Oven"] + 0.5)
    low, high = view.y_scale.min, view.y_scale.max
    assert high - low < 1e5
    view.y_scale.min, view.y_scale.max = low + 0.4 * (high - low), high  # too narrow: the bands leave it
    shared.set_settings(Oven=shared.settings["Oven"] - 0.5)
    bands = np.concatenate([np.asarray(m.y, dtype=float).ravel() for marks in view._marks.values()
                            for m in marks[:3]])
    assert view.y_scale.min <= bands.min() and bands.max() <= view.y_scale.max
