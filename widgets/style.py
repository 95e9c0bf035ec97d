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
