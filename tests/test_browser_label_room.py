"""At 1280 px the half-normal plot's labels and the ranked-effects chart's term names are not cut off.

A real Chromium (loopback only) on the served workbench of the invented demo campaign: every drawn label box
is measured against the box it must stay in (the half-normal plot area; the ranked chart's figure), and the
figures against the page width and every ancestor that clips. The demo's active effects have names up to
14 characters (e.g. "Dwell:Catalyst").
"""

from __future__ import annotations

import pytest
from conftest import SCREENSHOTS, loopback_only

from levelwise.widgets._label_room import CHAR_PX, rotated_tick_margins, scale_max_for_labels

pytestmark = pytest.mark.browser

MEASURE = """(sel) => {
  const box = e => { const r = e.getBoundingClientRect(); return [r.left, r.top, r.right, r.bottom]; };
  const fig = document.querySelector(sel);
  const svg = fig.querySelector('svg.svg-figure');
  // bqplot draws the axes in svg.svg-background and the marks in svg.svg-figure (same box): read both.
  const texts = [...fig.querySelectorAll('svg text')].filter(t => t.getBoundingClientRect().width > 0);
  const kind = t => t.closest('.tick') ? 'tick' : t.closest('.axis') ? 'axis'
                   : t.classList.contains('mainheading') ? 'title' : 'mark';
  const clips = [];
  for (let a = svg.parentElement; a; a = a.parentElement) {
    const s = getComputedStyle(a);
    if (s.overflowX !== 'visible' || s.overflowY !== 'visible') clips.push([a.className, box(a)]);
  }
  return {svg: box(svg), plot: box(fig.querySelector('.plotarea_background')), clips,
          texts: texts.map(t => [kind(t), t.textContent, box(t)])};
}"""


def inside(inner, outer, slack=1.0) -> bool:
    return (inner[0] >= outer[0] - slack and inner[1] >= outer[1] - slack and inner[2] <= outer[2] + slack
            and inner[3] <= outer[3] + slack)


@pytest.fixture(scope="module")
def page(served_workbench, browser):
    context = browser.new_context(viewport={"width": 1280, "height": 1000})
    page = context.new_page()
    page.route("**/*", loopback_only)
    page.goto(served_workbench, timeout=120_000)
    page.locator(".lw-coefficients table").first.wait_for(timeout=120_000)
    page.wait_for_function("""() => [...document.querySelectorAll('.lw-half-normal text')]
        .some(t => t.textContent.includes(':') && t.getBoundingClientRect().width > 0)""", timeout=60_000)
    page.locator(".lw-ranked-effects .tick text").nth(5).wait_for(timeout=60_000)
    page.wait_for_timeout(500)  # the last layout pass after the bars arrive
    yield page
    context.close()


def test_half_normal_labels_stay_inside_the_plot_area(page):
    got = page.evaluate(MEASURE, ".lw-half-normal")
    labels = [(text, b) for kind, text, b in got["texts"] if kind == "mark"]
    assert len(labels) >= 5, got["texts"]  # the demo has several active effects, each labelled
    outside = [(text, b) for text, b in labels if not inside(b, got["plot"])]
    assert outside == [], (outside, got["plot"])
    for name, clip in got["clips"]:
        assert inside(got["svg"], clip), (name, clip, got["svg"])


def test_ranked_effects_term_names_stay_inside_the_chart_and_the_page(page):
    got = page.evaluate(MEASURE, ".lw-ranked-effects")
    ticks = [(text, b) for kind, text, b in got["texts"] if kind == "tick" and not text.replace(".", "").isdigit()]
    assert len(ticks) >= 15, got["texts"]  # every candidate term of the demo's screening is ranked
    outside = [(text, b) for text, b in ticks if not inside(b, got["svg"])]
    assert outside == [], (outside, got["svg"])
    assert 0 <= got["svg"][0] and got["svg"][2] <= 1280, got["svg"]  # the chart is on the page, not beyond it
    for name, clip in got["clips"]:
        assert inside(got["svg"], clip), (name, clip, got["svg"])
    axis = [b for kind, text, b in got["texts"] if kind == "axis" and text == "Term"]
    assert axis and all(b[1] >= max(t[3] for _, t in ticks) - 1 for b in axis)  # "Term" under the names
    SCREENSHOTS.mkdir(parents=True, exist_ok=True)
    page.locator(".lw-effects-view").first.screenshot(path=str(SCREENSHOTS / "effects_1280.png"))


def test_room_is_worked_out_from_the_label_lengths():
    # By hand: a 340 px plot, a 4-character label 6 px right of its point at x = 10 needs
    # 10 * 340 / (340 - 6 - 4 * CHAR_PX) as the scale maximum.
    assert scale_max_for_labels([10.0], ["abcd"], 340.0) == pytest.approx(10 * 340 / (340 - 6 - 4 * CHAR_PX))
    assert scale_max_for_labels([1.0], ["x"], 340.0, floor=50.0) == 50.0
    short, long = rotated_tick_margins(["A"]), rotated_tick_margins(["Catalyst:Pretreat"])
    assert long["bottom"] > short["bottom"] and long["right"] > short["right"]
