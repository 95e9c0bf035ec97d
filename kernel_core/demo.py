"""The demo scenario: an INVENTED powder-coating cure study on a small-parts finishing line.

Every number here is invented for demonstration. The responses are generated from
the stated invented true model below plus seeded normal noise; they describe no
real process, coating or oven. Run ``python -m levelwise.demo`` to print the table.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from .design import Design, Factor, full_factorial

#: Seed of the invented data; change it and every demo number changes.
SEED = 20261201

FACTORS = (
    Factor("Oven", 170.0, 210.0, units="°C"),
    Factor("Dwell", 8.0, 16.0, units="min"),
    Factor("Film", 50.0, 90.0, units="µm"),
    Factor("Catalyst", 0.5, 1.5, units="%"),
)
RESPONSE = "Impact"
RESPONSE_UNITS = "J"
MODEL = "Oven + Dwell + Film + Catalyst + Oven:Dwell + Oven:Catalyst"

#: Invented true model of impact resistance (J), in coded units (-1/+1). Noise SD 0.35 J.
TRUE_MODEL = {
    "Intercept": 9.0,
    "Oven": 1.6,
    "Dwell": 0.9,
    "Film": -0.7,
    "Catalyst": 0.5,
    "Oven:Dwell": -0.6,
    "Oven:Catalyst": 0.4,
}
NOISE_SD = 0.35


def demo_design() -> Design:
    """The 2^4 full factorial with 3 centre points, in a seeded random run order."""
    return full_factorial(list(FACTORS), center_points=3, seed=SEED)


def demo_data() -> pd.DataFrame:
    """Run sheet of the demo design with the INVENTED impact-resistance results filled in."""
    design = demo_design()
    coded = design.coded
    truth = np.full(len(coded), TRUE_MODEL["Intercept"])
    for term, value in TRUE_MODEL.items():
        if term != "Intercept":
            truth += value * np.prod([coded[name] for name in term.split(":")], axis=0)
    rng = np.random.default_rng(SEED + 1)
    table = design.table.copy()
    table[RESPONSE] = np.round(truth + rng.normal(0.0, NOISE_SD, len(truth)), 2)
    return table


if __name__ == "__main__":  # pragma: no cover - a convenience printout
    print("INVENTED demo data (levelwise powder-coating scenario):")
    print(demo_data().to_string(index=False))
