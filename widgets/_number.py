"""Number fields that read what was typed, on the kernel, and never reinterpret it.

A browser number box turns ``1,5`` into 15 and ``2x0`` into 20 before the kernel sees it. ``NumberField`` is a
text box read here: a decimal point or a decimal comma is accepted (``1,5`` is 1.5); text that could mean two
numbers (``1,500``: 1.5 or 1500?) or is not a number (``2x0``) is refused with a message beside the field,
and the field keeps its last good value.
"""

from __future__ import annotations

import html
import math
import re

import ipywidgets as ipw
import traitlets

from levelwise import LevelwiseError

_PLAIN = re.compile(r"^[+-]?(\d+(\.\d*)?|\.\d+)([eE][+-]?\d+)?$")


def parse_number(text: str, *, field: str = "number", integer: bool = False, minimum=None, maximum=None):
    """The number *text* means, or a ``LevelwiseError`` naming *field*, what is allowed and what arrived.

    Accepted: ``12``, ``-0.5``, ``1.5e3``, and a decimal comma ``1,5``. Refused: thousands separators or
    both separators (``1,500``, ``1.234,5``: ambiguous), anything else (``2x0``, ``1_0``, ``inf``).
    """
    raw = str(text)
    s = raw.strip().replace("\u2212", "-")
    what = "a whole number" if integer else "a number"
    if not s:
        raise LevelwiseError(f"{field}: enter {what}. The field is empty.")
    if "," in s:
        if "." in s or s.count(",") > 1:
            raise LevelwiseError(
                f"{field}: {raw!r} mixes separators or groups thousands, so it could mean two numbers. "
                f"Write {what} with one decimal point or comma and no thousands separator, e.g. 1500 or 1.5."
            )
        before, after = s.split(",")
        if len(after) == 3 and before.lstrip("+-") not in ("", "0"):
            raise LevelwiseError(
                f"{field}: {raw!r} could be {before}.{after} (decimal comma) or {before}{after} (thousands). "
                f"Write {before}.{after} or {before}{after}."
            )
        s = f"{before}.{after}"
    if not _PLAIN.match(s):
        raise LevelwiseError(f"{field}: {raw!r} is not {what}. Use digits with an optional sign, decimal "
                             "point or comma and exponent, e.g. 12, -0.5, 1,5 or 2e3.")
    value = float(s)
    if not math.isfinite(value):
        raise LevelwiseError(f"{field}: {raw!r} is too large.")
    if integer:
        if value != int(value):
            raise LevelwiseError(f"{field}: enter a whole number. Got {raw!r}.")
        value = int(value)
    if minimum is not None and value < minimum:
        raise LevelwiseError(f"{field}: must be at least {minimum}. Got {raw!r}.")
    if maximum is not None and value > maximum:
        raise LevelwiseError(f"{field}: must be at most {maximum}. Got {raw!r}.")
    return value


def _show(value) -> str:
    if isinstance(value, int):
        return str(value)
    return f"{value:.12g}"


class NumberField(ipw.VBox):
    """A text box holding a number: ``value`` (float, or int with ``integer=True``) changes only on good text.

    ``text`` is the ipywidgets.Text typed into (``lw-number``); ``message`` shows why text was refused
    (``lw-number-error``); ``error`` holds that message ('' when the text is good).
    """

    value = traitlets.Float(0.0)
    error = traitlets.Unicode("")

    def __init__(self, value=0.0, *, description="", integer=False, minimum=None, maximum=None,
                 layout=None, style=None, placeholder="", description_allow_html=False):
        self.integer, self.minimum, self.maximum = integer, minimum, maximum
        if integer:
            self.add_traits(value=traitlets.Int(0))
        kwargs = {"layout": layout} if layout is not None else {}
        self.text = ipw.Text(value=_show(int(value) if integer else float(value)), description=description,
                             continuous_update=False, placeholder=placeholder,
                             description_allow_html=description_allow_html,
                             style=style or {}, **kwargs).add_class("lw-number")
        self.message = ipw.HTML().add_class("lw-number-error")
        super().__init__([self.text, self.message])
        self.value = int(value) if integer else float(value)
        self.text.observe(self._on_text, names="value")
        self.observe(self._on_value, names="value")

    @property
    def field_name(self) -> str:
        """The description as plain text (it may be inert HTML), for messages."""
        text = re.sub(r"<[^>]*>", "", self.text.description or "number")
        return html.unescape(text)

    @property
    def description(self) -> str:
        return self.text.description

    @description.setter
    def description(self, text: str) -> None:
        self.text.description = text

    @property
    def disabled(self) -> bool:
        return self.text.disabled

    @disabled.setter
    def disabled(self, flag: bool) -> None:
        self.text.disabled = flag

    def _on_text(self, change) -> None:
        try:
            number = parse_number(change["new"], field=self.field_name, integer=self.integer,
                                  minimum=self.minimum, maximum=self.maximum)
        except LevelwiseError as exc:
            self.error = str(exc)
            self.message.value = f'<div class="lw-error">{html.escape(str(exc))}</div>'
            return
        self.error = ""
        self.message.value = ""
        self.value = number

    def _on_value(self, change) -> None:
        shown = self.text.value
        try:
            same = parse_number(shown, integer=self.integer) == change["new"]
        except LevelwiseError:
            same = False
        if not same:
            self.text.value = _show(change["new"])
