"""A study whose every text field carries markup and typesetting payloads, built through the public API (tests only).

The payloads: an HTML comment opener with a script tag, a script end tag, a comment closer, and TeX that
MathJax would typeset and restyle (``\\style``). Every view must show them as plain text.
"""

from __future__ import annotations

PAYLOAD = "<!--<script> </script> --> $\\style{color:red}{BIG}$"
TEX = "$\\style{color:red}{BIG}$"


def hostile_study():
    """A two-factor study (invented data) with PAYLOAD in the title, notes, names, units, stage and reason."""
    import numpy as np

    from levelwise import Factor, full_factorial
    from levelwise.study import Study

    factors = [Factor("Oven " + PAYLOAD, 150, 200, "C " + PAYLOAD), Factor("Dwell " + PAYLOAD, 10, 20, PAYLOAD)]
    study = Study(factors, title="Title " + PAYLOAD + " (invented)", notes="Notes " + PAYLOAD)
    design = full_factorial(study.factors, randomize=False)
    study.add_stage("Stage " + PAYLOAD, design, description="Stage text " + PAYLOAD)
    study.add_stage("Repeat " + PAYLOAD, design, renumber=True)  # a replicate: its runs follow the first
    response = "Yield " + PAYLOAD
    study.add_response(response, units="g " + PAYLOAD, goal="maximize")
    rng = np.random.default_rng(7)
    planned = study.planned()
    for run in study.run_ids:
        oven, dwell = (planned.loc[run, f.name] for f in study.factors)
        study.record(run, response, float(50 + 0.1 * (oven - 175) + 0.3 * (dwell - 15) + rng.normal(0, 0.5)))
    try:
        study.set_model(response, "two_factor_interactions")
    except ValueError:  # before the agreed preset names land
        study.set_model(response, "two_factor_interactions")
    study.exclude(study.run_ids[-1], reason="Reason " + PAYLOAD)
    return study
