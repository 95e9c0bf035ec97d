"""The demo's reformulation stage: an INVENTED powder-coating powder reformulation (a mixture experiment).

Every number here is invented for demonstration. It describes no real powder, resin or pigment. The responses
are generated from the stated invented true models below plus seeded normal noise.

The story: after the cure campaign (:mod:`levelwise.demo_campaign`), the powder itself is reformulated. Four
components in percent of the powder mass (total 100): resin 50-75, hardener 5-15, filler 10-35, pigment 2-10.
The region is cut by those bounds, so the design is an extreme-vertices design (every vertex, the centroids of
the edges and the overall centroid, the centroid made three times for pure error). Two responses: impact
resistance (J, maximise) and 60° gloss (GU, on target at 85).
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from .design._mixture import extreme_vertices, mixture_design, role_column
from .design._mixture_region import Component, Mixture

#: Seed of the invented stage; change it and every number changes.
SEED = 20261212

TITLE = "Powder reformulation (invented data)"

COMPONENTS = (
    Component("Resin", 50.0, 75.0, units="%"),
    Component("Hardener", 5.0, 15.0, units="%"),
    Component("Filler", 10.0, 35.0, units="%"),
    Component("Pigment", 2.0, 10.0, units="%"),
)
TOTAL = 100.0

#: Responses: name -> (units, goal, target).
RESPONSES = {"Impact": ("J", "maximize", None), "Gloss": ("GU", "target", 85.0)}

#: The INVENTED true Scheffé models over the proportions (amount / 100); keys are products of component names.
TRUE_MODELS = {
    "Impact": {"Resin": 14.0, "Hardener": 30.0, "Filler": -6.0, "Pigment": 4.0, "Resin:Hardener": 40.0,
               "Resin:Filler": 12.0},
    "Gloss": {"Resin": 95.0, "Hardener": 60.0, "Filler": 40.0, "Pigment": 120.0, "Resin:Filler": 30.0,
              "Filler:Pigment": -150.0},
}
NOISE_SD = {"Impact": 0.3, "Gloss": 0.7}


def _true_value(model: dict, proportions: pd.DataFrame) -> np.ndarray:
    out = np.zeros(len(proportions))
    for key, coef in model.items():
        out += coef * np.prod([proportions[name].to_numpy() for name in key.split(":")], axis=0)
    return out


def reformulation_stage(seed: int = SEED):
    """The invented reformulation stage: (design, data) with the responses filled in.

    ``data`` is the design table (run order) with ``Impact`` and ``Gloss``; its ``attrs["invented"]`` is True and
    ``attrs["title"]`` says so.
    """
    mixture = Mixture(COMPONENTS, total=TOTAL)
    base = extreme_vertices(mixture, centroids=(1,), randomize=False)
    centre = base.table[base.table[role_column(base)] == "overall_centroid"]
    table = pd.concat([base.table] + [centre] * 2, ignore_index=True)
    names = mixture.names
    design = mixture_design(mixture, table[names].to_numpy(dtype=float), table[role_column(base)].to_list(),
                            kind="extreme vertices", randomize=True, seed=seed,
                            metadata={"invented": True, "title": TITLE})
    data = design.table.copy()
    rng = np.random.default_rng(seed)
    proportions = data[names] / TOTAL
    for response, model in TRUE_MODELS.items():
        data[response] = np.round(_true_value(model, proportions) + rng.normal(0.0, NOISE_SD[response], len(data)),
                                  2)
    data.attrs["invented"] = True
    data.attrs["title"] = TITLE
    return design, data


__all__ = ["COMPONENTS", "RESPONSES", "TITLE", "TRUE_MODELS", "reformulation_stage"]
