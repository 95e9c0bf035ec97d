"""Write tests/data/study_example.json: an INVENTED two-stage study in the current file format.

The numbers come from levelwise.demo (invented, seeded) plus a second, invented centre-point
stage. Run ``PYTHONPATH=. python tests/data/make_example_study.py`` from the repository root.
"""

from pathlib import Path

import numpy as np
import pandas as pd

from levelwise import demo
from levelwise.study import Study


def build() -> Study:
    study = Study(list(demo.FACTORS), title="Invented powder-coating cure study (example)",
                  notes="INVENTED data from levelwise.demo; no real process.")
    study.add_stage("screen", demo.demo_design(), description="2^4 full factorial with 3 centre points")
    study.add_response(demo.RESPONSE, units=demo.RESPONSE_UNITS, goal="maximize")
    study.add_response("Gloss", units="GU", goal="target", target=85.0)
    data = demo.demo_data()
    for run, value in zip(study.run_ids, data[demo.RESPONSE]):
        study.record(run, demo.RESPONSE, float(value))
    rng = np.random.default_rng(demo.SEED + 7)  # invented gloss values
    for run in study.run_ids:
        study.record(run, "Gloss", float(np.round(84 + rng.normal(0, 1.5), 1)))
    centre = pd.DataFrame([{f.name: f.center for f in demo.FACTORS}] * 3).assign(role="centre", block=2)
    extra = study.add_stage("centre check", centre, description="three more centre points, next day")
    for run, value in zip(extra, (9.1, 8.7, 9.3)):  # invented
        study.record(run, demo.RESPONSE, value)
    study.record_achieved(2, "Oven", 172.5, reason="oven overshoot logged by the controller")
    study.exclude(5, "panel dropped before the impact test", response=demo.RESPONSE)
    study.set_model(demo.RESPONSE, demo.MODEL)
    study.set_model("Gloss", "Oven + Dwell + Film + Catalyst")
    return study


if __name__ == "__main__":
    build().save(Path(__file__).with_name("study_example.json"))
