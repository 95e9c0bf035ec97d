"""The demo campaign: an INVENTED powder-coating cure campaign in three stages, as one study file.

Every number here is invented for demonstration. It describes no real coating, oven or process.
The responses are generated from the stated invented true models below, evaluated at the settings
the (invented) line actually achieved, plus seeded normal noise.

The story
---------
1. **Screen** (``screen``): a 2^(6-2) fractional factorial, resolution IV, generators
   ``Airflow = Oven:Dwell:Film`` and ``Pretreat = Oven:Dwell:Catalyst``, with 4 centre points
   (20 runs). Two runs missed their oven set-point (the achieved temperature is recorded), and
   one run's panel was damaged before its impact test (that response is missing). In this
   fraction the interaction Oven:Dwell is aliased with Film:Airflow (and Catalyst:Pretreat).
2. **Fold-over** (``fold-over``): the screen folded on Airflow (its column reversed), 16 runs in a
   new block. Together the two blocks separate Oven:Dwell from Film:Airflow: the invented truth
   has the first and not the second.
3. **Response surface** (``surface``): a face-centred central composite design on the three active
   factors Oven, Dwell and Film (18 runs, 4 centre runs), the other three held at their centres.

Responses: impact resistance (J, maximise), 60° gloss (gloss units, on target at 85) and
yellowness index (minimise). The study's models are quadratic in Oven, Dwell and Film, linear in
the other three factors.

A pass/fail response (issue 15): every run's 20 panels get a cross-hatch adhesion check; ``Adhesion`` counts
the panels that pass, out of ``Panels`` tested (a binomial response with a logit link). Its invented truth is
on the log-odds scale (:data:`ADHESION_TRUTH`), its counts drawn from a second seeded stream so that the other
responses keep their values; its goal is a pass rate of at least 90 %, fully satisfying from 98 %.

Run ``python -m levelwise.demo_campaign PATH`` to write the study file. The file shipped with
levelwise (``dashboards/data/demo_campaign.json``) is exactly what this writes; a test checks it.
"""

from __future__ import annotations

import sys
from contextlib import contextmanager
from datetime import UTC, datetime, timedelta

import numpy as np

from .design import Factor, central_composite, fold_over, fractional_factorial

#: Seed of the invented campaign; change it and every number changes.
SEED = 20261202

TITLE = "Powder-coating cure campaign (invented data)"

FACTORS = (
    Factor("Oven", 170.0, 210.0, units="°C"),
    Factor("Dwell", 8.0, 16.0, units="min"),
    Factor("Film", 50.0, 90.0, units="µm"),
    Factor("Catalyst", 0.5, 1.5, units="%"),
    Factor("Airflow", 0.5, 1.5, units="m/s"),
    Factor("Pretreat", 2.0, 6.0, units="g/L"),
)

SCREEN_GENERATORS = ["Airflow=Oven:Dwell:Film", "Pretreat=Oven:Dwell:Catalyst"]
FOLD_FACTOR = "Airflow"
ACTIVE = ("Oven", "Dwell", "Film")

#: Responses: name -> (units, goal, target).
RESPONSES = {
    "Impact": ("J", "maximize", None),
    "Gloss": ("GU", "target", 85.0),
    "Yellowness": ("YI", "minimize", None),
}

#: The INVENTED true models, in coded units (-1 at each factor's low end, +1 at its high end).
#: Keys are products of factor names; "" is the constant. Noise standard deviations beside them.
TRUE_MODELS = {
    "Impact": {
        "": 10.2, "Oven": 1.5, "Dwell": 0.9, "Film": -0.7, "Catalyst": 0.15,
        "Oven:Dwell": -0.6,  # aliased with Film:Airflow in the screen, whose true value is 0
        "Oven:Oven": -0.9, "Dwell:Dwell": -0.4,
    },
    "Gloss": {
        "": 86.0, "Oven": -2.4, "Dwell": -1.4, "Film": 1.3, "Dwell:Film": 0.8, "Oven:Oven": -1.1,
    },
    "Yellowness": {
        "": 3.1, "Oven": 1.2, "Dwell": 0.7, "Film": 0.2, "Oven:Dwell": 0.5, "Oven:Oven": 0.45,
    },
}
NOISE_SD = {"Impact": 0.35, "Gloss": 0.8, "Yellowness": 0.2}

#: The pass/fail response: panels passing the cross-hatch check out of PANELS per run (binomial, logit link).
ADHESION, PANELS, PANELS_PER_RUN = "Adhesion", "Panels", 20
#: The INVENTED true log-odds of a panel passing, in coded units (as TRUE_MODELS).
ADHESION_TRUTH = {"": 2.0, "Oven": 0.9, "Dwell": 0.5, "Film": -0.45, "Pretreat": 0.35, "Oven:Oven": -0.5}
#: Its model: the curvature in Oven and the other main effects; its goal: pass rate >= 90 %, 98 % fully desirable.
ADHESION_MODEL = "Oven + Dwell + Film + I(Oven**2) + Catalyst + Airflow + Pretreat"
ADHESION_GOAL = {"lower_limit": 0.90, "target": 0.98}

#: The models the study records for each response.
MODEL = "(Oven + Dwell + Film)**2 + I(Oven**2) + I(Dwell**2) + I(Film**2) + Catalyst + Airflow + Pretreat"

#: The oven missed its set-point on two screen runs: the first run planned at the high end came out
#: 5.5 °C cool and the first planned at the low end 4 °C hot (°C away from plan).
OVEN_MISSES = {"high": -5.5, "low": +4.0}
#: The third factorial run of the screen (in run order) lost its panel before the impact test.
MISSING_IMPACT = 2


def truth(response: str, natural: dict) -> float:
    """The invented true mean of *response* at natural *settings* (every factor named); for ``Adhesion`` the
    log-odds of one panel passing."""
    coded = {f.name: (natural[f.name] - f.center) / ((f.high - f.low) / 2.0) for f in FACTORS}
    total = 0.0
    for term, value in (ADHESION_TRUTH if response == ADHESION else TRUE_MODELS[response]).items():
        total += value * (np.prod([coded[name] for name in term.split(":")]) if term else 1.0)
    return float(total)


@contextmanager
def _fixed_clock(start=datetime(2026, 11, 2, 7, 30, tzinfo=UTC)):
    """Audit timestamps from a fixed, advancing clock, so the generated file is the same every time."""
    from .study import _values

    ticks = iter(range(10**6))

    def now():
        moment = start + timedelta(minutes=next(ticks))
        return moment.isoformat(timespec="milliseconds").replace("+00:00", "Z")

    saved = _values.now
    _values.now = now
    try:
        yield
    finally:
        _values.now = saved


def _record(study, rng, run: int, skip=(), counts=None) -> None:
    """Record every response of *run* from the truth at its achieved settings plus noise (*skip*: not measured);
    the adhesion passes out of 20 panels are drawn from *counts* (binomial at the true pass probability)."""
    actual = study.data(apply_exclusions=False).loc[run, [f.name for f in FACTORS]].to_dict()
    for response in RESPONSES:
        value = truth(response, actual) + rng.normal(0.0, NOISE_SD[response])  # drawn even when skipped
        if response not in skip:
            study.record(run, response, round(value, 2))
    if counts is not None:
        chance = 1.0 / (1.0 + np.exp(-truth(ADHESION, actual)))
        study.record(run, PANELS, float(PANELS_PER_RUN))
        study.record(run, ADHESION, float(counts.binomial(PANELS_PER_RUN, chance)))


def campaign_study():
    """Build the invented campaign as a :class:`levelwise.study.Study` (deterministic)."""
    from .study import Study

    rng = np.random.default_rng(SEED)
    counts = np.random.default_rng(SEED + 4)  # the adhesion draws: a stream of their own
    with _fixed_clock():
        study = Study(
            list(FACTORS),
            title=TITLE,
            notes=(
                "INVENTED data for demonstration, generated by kernel_core/demo_campaign.py from stated invented "
                "true models plus seeded noise. It describes no real coating, oven or process."
            ),
        )
        for name, (units, goal, target) in RESPONSES.items():
            study.add_response(name, units=units, goal=goal, target=target)
        study.add_response(PANELS, units="panels")
        study.add_response(ADHESION, units="panels passed", goal="maximize", family="binomial", trials=PANELS,
                           **ADHESION_GOAL)

        screen = fractional_factorial(list(FACTORS), runs=16, generators=SCREEN_GENERATORS, center_points=4,
                                      seed=SEED)
        screen_ids = study.add_stage("screen", screen, description="2^(6-2) resolution IV screen, 4 centre points",
                                     reason="find the active factors")
        oven = screen.table["Oven"].to_numpy()
        factorial = np.flatnonzero(screen.table["role"].to_numpy() == "corner")
        missed = {
            int(factorial[oven[factorial] == FACTORS[0].high][0]): OVEN_MISSES["high"],
            int(factorial[oven[factorial] == FACTORS[0].low][0]): OVEN_MISSES["low"],
        }
        for position, shift in missed.items():
            study.record_achieved(screen_ids[position], "Oven", float(oven[position]) + shift,
                                  reason="oven log shows the set-point was missed")
        damaged = int(factorial[MISSING_IMPACT])
        for position, run in enumerate(screen_ids):
            _record(study, rng, run, skip=("Impact",) if position == damaged else (), counts=counts)
        study.set_notes(study.notes + f" Run {screen_ids[damaged]}: panel damaged in handling before the impact "
                        "test, so its impact resistance is missing.", reason="record the missing value")

        folded = fold_over(screen, factor=FOLD_FACTOR, seed=SEED + 1)  # only the 16 new runs, in block 2
        fold_ids = study.add_stage("fold-over", folded, description=f"fold-over on {FOLD_FACTOR}",
                                   reason="separate Oven:Dwell from Film:Airflow")
        for run in fold_ids:
            _record(study, rng, run, counts=counts)

        ccd = central_composite([f for f in FACTORS if f.name in ACTIVE], kind="face", center_points=4,
                                seed=SEED + 2)
        table = ccd.table.copy()
        for f in FACTORS:
            if f.name not in ACTIVE:
                table[f.name] = f.center
        surface_ids = study.add_stage("surface", table, description="face-centred central composite on "
                                      + ", ".join(ACTIVE), reason="model curvature in the active factors",
                                      renumber=True)  # an independent design: its runs follow the study's
        for run in surface_ids:
            _record(study, rng, run, counts=counts)
        for response in RESPONSES:
            study.set_model(response, MODEL, reason="quadratic in the active factors after the fold-over")
        study.set_model(ADHESION, ADHESION_MODEL, reason="logit model: curvature in the oven, main effects")
    return study


def write(path) -> None:
    """Write the invented campaign's study file to *path*."""
    from pathlib import Path

    Path(path).write_text(campaign_study().to_json(), encoding="utf-8")


if __name__ == "__main__":  # pragma: no cover - the command-line entry point
    if len(sys.argv) != 2:
        print("usage: python -m levelwise.demo_campaign PATH", file=sys.stderr)
        sys.exit(2)
    write(sys.argv[1])
