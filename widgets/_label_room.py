"""Room for text labels in bqplot figures, worked out in the kernel from the label lengths.

The browser draws the labels, so their exact widths are not known here; a conservative width per character of
the 12-14 px sans-serif the views use (:data:`CHAR_PX`) is enough to keep every label inside its figure. The
browser test tests/test_browser_label_room.py measures the drawn boxes at 1280 px.
"""

from __future__ import annotations

import math

#: Width reserved per character of a label (12 px text: 6-7 px a character; kept generous).
CHAR_PX = 7.5
#: Height of one line of tick text.
LINE_PX = 14.0


def scale_max_for_labels(x, texts, plot_px: float, *, offset_px: float = 6.0, floor: float = 0.0) -> float:
    """The smallest x-scale maximum (the minimum being 0) that keeps every label, drawn *offset_px* right of its
    point, inside a plot *plot_px* wide; at least *floor*. A label too long to fit at all is given at most 70 %
    of the plot (its point then sits in the left 30 %)."""
    best = float(floor)
    for value, text in zip(x, texts):
        room = plot_px - offset_px - CHAR_PX * len(str(text))
        room = max(room, 0.3 * plot_px)
        if value > 0:
            best = max(best, float(value) * plot_px / room)
    return best


def rotated_tick_margins(labels, angle_deg: float = 35.0, *, axis_label_px: float = 22.0) -> dict:
    """Figure margins (px) that hold x tick labels rotated by *angle_deg* about their centre: the bottom holds
    the tallest label and the axis label under it; left and right hold half the widest label's span."""
    longest = max((len(str(t)) for t in labels), default=0)
    angle = math.radians(abs(angle_deg))
    width = CHAR_PX * longest
    span_x = width * math.cos(angle) + LINE_PX * math.sin(angle)
    span_y = width * math.sin(angle) + LINE_PX * math.cos(angle)
    return {"bottom": int(math.ceil(span_y + axis_label_px + 14)), "right": int(math.ceil(span_x / 2 + 8)),
            "left": int(math.ceil(max(60.0, span_x / 2 + 8)))}


__all__ = ["CHAR_PX", "rotated_tick_margins", "scale_max_for_labels"]
