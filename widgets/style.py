"""The levelwise visual language: one palette, one current-setting marker, plain labels.

Series colours are the Okabe & Ito (2008) colour-blind-safe palette. Surfaces use
the cividis colour map. The current setting is drawn the same way in every view:
a black diamond with a white edge.
"""

OKABE_ITO = {
    "black": "#000000",
    "orange": "#E69F00",
    "sky_blue": "#56B4E9",
    "bluish_green": "#009E73",
    "yellow": "#F0E442",
    "blue": "#0072B2",
    "vermillion": "#D55E00",
    "reddish_purple": "#CC79A7",
}

MEAN_COLOR = OKABE_ITO["blue"]
CI_COLOR = OKABE_ITO["blue"]
PI_COLOR = OKABE_ITO["orange"]
CURRENT_MARKER = {"marker": "diamond", "colors": [OKABE_ITO["black"]], "stroke": "white", "default_size": 90}

WORDS = {
    "mean": "expected mean",
    "ci": "confidence interval for the mean",
    "pi": "prediction interval for a single new run",
}


def fmt(value: float, digits: int = 4) -> str:
    """Format a number for a readout: significant digits, no exponent for everyday values."""
    if value != value:  # NaN
        return "not available"
    return f"{value:.{digits}g}" if abs(value) >= 1e-3 or value == 0 else f"{value:.3e}"

#: Colour map of every surface: cividis (Nuñez, Anderton & Renslow 2018), readable with colour-vision
#: deficiency and in greyscale. Five stops, dark blue to yellow (stop values from memory).
CIVIDIS = ["#00204D", "#414D6B", "#7C7B78", "#BCAF6F", "#FFEA46"]
CONTOUR_COLOR = "#FFFFFF"
DESIGN_POINT_COLOR = OKABE_ITO["vermillion"]

#: Runs used in the fit are filled; excluded runs stay visible as hollow grey squares.
RUN_COLOR = OKABE_ITO["blue"]
EXCLUDED_COLOR = "#7F7F7F"
HIGHLIGHT_COLOR = OKABE_ITO["vermillion"]
ACTIVE_COLOR = OKABE_ITO["vermillion"]
INACTIVE_COLOR = OKABE_ITO["sky_blue"]
ME_LINE = {"colors": [OKABE_ITO["bluish_green"]], "line_style": "dashed", "stroke_width": 1.5}
SME_LINE = {"colors": [OKABE_ITO["reddish_purple"]], "line_style": "dash_dotted", "stroke_width": 1.5}

#: Plain words for the quantities a view can draw on a surface.
SURFACE_QUANTITIES = {
    "mean": "expected mean",
    "ci_half": "half-width of the 95% confidence interval for the mean",
    "pi_half": "half-width of the 95% prediction interval for a single new run",
    "desirability": "overall desirability (0 = unacceptable, 1 = ideal)",
}


def figure_layout(width: int = 320, height: int = 260):
    """Default size of a small figure."""
    import ipywidgets as ipw

    return ipw.Layout(width=f"{width}px", height=f"{height}px")


#: CSS class that tells the page's math typesetter (MathJax) to leave an element's text alone.
NO_MATH = "mathjax_ignore"


def inert_html(text: str) -> str:
    """User text as inert HTML for a widget label: escaped, and marked so that ``$...$`` is never typeset.

    ipywidgets typesets every description label with MathJax, so a factor named ``$\\style{color:red}{BIG}$``
    would restyle the page. Use with ``description_allow_html=True``.

    Examples
    --------
    >>> inert_html("Oven $x$ <b>")
    '<span class="mathjax_ignore">Oven $x$ &lt;b&gt;</span>'
    """
    import html

    return f'<span class="{NO_MATH}">{html.escape(str(text), quote=True)}</span>'


def plain_text(label: str) -> str:
    """The text a label made by :func:`inert_html` shows (any other string is returned unchanged).

    Examples
    --------
    >>> plain_text(inert_html("Oven $x$ <b>"))
    'Oven $x$ <b>'
    """
    import html

    prefix, suffix = f'<span class="{NO_MATH}">', "</span>"
    if label.startswith(prefix) and label.endswith(suffix):
        return html.unescape(label[len(prefix):-len(suffix)])
    return label
