"""Long work in the design builder: settled inputs, a background search with progress, Stop keeps the best.

Run inside an asyncio loop, as a kernel or Voilà runs the views: the search then runs on a worker thread and
every widget change must still happen on the main thread (ipykernel 7 refuses comm messages from others).
The demo study is the invented, seeded scenario of kernel_core/demo.py.
"""

from __future__ import annotations

import asyncio
import threading
import time

from levelwise import demo
from levelwise.widgets import DesignBuilder, SharedModel
from levelwise.widgets import design_builder as builder_module


def make_shared():
    return SharedModel(demo.FACTORS, demo.demo_data(), responses=["Impact"], models={"Impact": demo.MODEL},
                       units={"Impact": "J"}, design=demo.demo_design())


async def wait_until(condition, timeout=30.0):
    deadline = time.monotonic() + timeout
    while not condition():
        assert time.monotonic() < deadline, "timed out"
        await asyncio.sleep(0.02)


def test_inputs_settle_before_one_rebuild(monkeypatch):
    calls = []
    real = builder_module.full_factorial
    monkeypatch.setattr(builder_module, "full_factorial", lambda *a, **k: calls.append(1) or real(*a, **k))

    async def scenario():
        builder = DesignBuilder(make_shared())
        builder.rebuild.delay = 0.15
        await wait_until(lambda: not builder.rebuild.pending)
        calls.clear()
        for _ in range(4):  # four clicks in a row
            builder.add_factor()
            await asyncio.sleep(0.01)
        builder.options["replicates"].value = 2
        assert calls == []  # nothing rebuilt while the inputs move
        await wait_until(lambda: not builder.rebuild.pending)
        assert calls == [1]
        assert len(builder.design) == 2 ** 8 * 2 + 3  # 4 + 4 factors, two replicates, 3 centre points

    asyncio.run(scenario())


def test_search_runs_in_background_and_stop_keeps_best():
    threads = []

    async def scenario():
        builder = DesignBuilder(make_shared())
        builder.rebuild.delay = 0.05
        builder.progress.observe(lambda change: threads.append(threading.current_thread()), names="value")
        builder._building = True  # set several inputs, then search once
        for _ in range(20 - len(builder.factor_rows)):
            builder.add_factor()
        builder.family.value = "fractional"
        builder.options["runs"].value = 32
        builder.options["center_points"].value = 0
        builder._building = False
        builder.rebuild.cancel()
        assert builder.search() is None  # started, not finished
        assert builder.task.running and builder.task.thread.is_alive()
        assert builder.task.stop_button.layout.display == ""
        await wait_until(lambda: 0 < builder.progress.value < 1)  # the loop is free while the search runs
        builder.task.stop_button.click()
        await wait_until(lambda: not builder.task.running)
        design = builder.design
        assert design is not None and len(design) == 32 and len(design.factors) == 20
        assert design.metadata["search_complete"] is False and design.metadata["stopped"] == "cancelled"
        assert "best design found so far" in builder.status.value
        assert builder.task.stop_button.layout.display == "none"
        assert "lw-run-sheet-table" in builder.run_sheet.value

    asyncio.run(scenario())
    assert threads and all(t is threading.main_thread() for t in threads)


def test_changed_inputs_drop_a_running_search():
    async def scenario():
        builder = DesignBuilder(make_shared())
        builder.rebuild.delay = 0.05
        builder._building = True
        for _ in range(20 - len(builder.factor_rows)):
            builder.add_factor()
        builder.family.value = "fractional"
        builder.options["runs"].value = 32
        builder.options["center_points"].value = 0
        builder._building = False
        builder.rebuild.cancel()
        builder.search()
        old = builder.task.thread
        await wait_until(lambda: builder.progress.value > 0)
        builder.options["runs"].value = 24  # the inputs change while the search runs
        builder.family.value = "plackett_burman"
        assert not builder.task.running
        await wait_until(lambda: not old.is_alive())  # the old search was told to stop
        await wait_until(lambda: not builder.rebuild.pending)
        await asyncio.sleep(0.2)  # anything the old search might still deliver has arrived
        assert builder.design is not None, builder.status.value
        assert "Plackett" in builder.design.kind and len(builder.design) == 24
        assert "best design found so far" not in builder.status.value

    asyncio.run(scenario())
