"""The offline single-file export: one HTML page that still computes, with no network and no Python.

The page embeds, per response, exactly the payload of the fit's prediction engine
(:meth:`levelwise.PredictionEngine.payload`): the factors, the exponent matrix, the coded
coefficients, a factor F of their covariance, the coding centre and half-range, the factor
ranges, the half-width scale c (t quantile times s) and the leverage limit. A small
hand-written script evaluates, at the slider settings, the same formulas as the engine::

    coded = (x - centre) / scale
    row_j = prod_i coded_i ** E[j, i]
    mean  = row . beta
    h     = || row F ||^2
    CI    = mean -/+ c * sqrt(h)             (confidence interval for the mean)
    PI    = mean -/+ c * sqrt(h + extra)     (prediction interval for a single new run)
    extrapolated: a factor the model uses outside [low, high], or h > limit

A count response's fit (``link`` set) is evaluated the same way on the link scale; the page then transforms
the mean and the CI edges by the inverse link (logistic, normal distribution function, exponential) and shows a
probability as a percentage, with no prediction interval (the payload's ``note`` says why).

and draws the per-factor traces with their bands and the surface slice in plain SVG and
canvas. Nothing is fetched: no CDN, no fonts, no scripts from elsewhere. The numbers at
the current settings are also written, at full precision, to ``data-numbers`` of the
``#lw-numbers`` element, so a test can compare them with the kernel to 1e-9.
"""

from __future__ import annotations

import html
import json
import re
from pathlib import Path

import numpy as np

from levelwise import Study

from .study_source import is_invented, open_study, shared_model, title_of
from .summary import CAUTION, error_numbers, fingerprint, summary_html


def _fits_of(shared) -> dict:
    fits = getattr(shared, "fits", None)
    if fits:
        return {name: f for name, f in fits.items() if f is not None}
    return {shared.response: shared.fit} if shared.fit is not None else {}


def _finite_or_none(value):
    """JSON has no NaN: a saturated fit's s and t travel as null and the page shows 'not available'."""
    value = float(value)
    return value if np.isfinite(value) else None


def _run_column(values, factor) -> np.ndarray:
    """A run-table column as numbers: natural settings, or the level index of a categorical factor."""
    levels = list(getattr(factor, "levels", ()) or ())
    if not levels:
        return np.asarray(values, dtype=float)
    index = {str(level): k for k, level in enumerate(levels)}
    return np.array([index.get(str(v), np.nan) for v in values], dtype=float)


def count_payload(fit) -> dict:
    """How the page shows a count response's fit: the engine's numbers are on the link scale; the page
    transforms the mean and the CI edges by the inverse link (``link``: logit, probit or log) and gives no
    prediction interval (``note`` says why). A binomial fit's probability is shown as a percentage."""
    if getattr(fit, "kind", None) != "glm":
        return {"link": None}
    return {"link": fit.link, "family": fit.family, "note": fit.new_observation_note,
            "percent": fit.family == "binomial"}


def payload(study: Study) -> dict:
    """Everything the page needs, as plain JSON-able numbers (the model per response, the runs, the text)."""
    shared = source = shared_model(study, read_only=True)
    fits = _fits_of(shared)
    responses = []
    for name in source.responses:
        fit = fits.get(name)
        if fit is None:
            continue
        responses.append({
            "name": name,
            "units": source.units.get(name, ""),
            "terms": list(fit.terms),
            "s": _finite_or_none(error_numbers(fit)[0]),
            "df": error_numbers(fit)[1],
            **fit.engine.payload(),  # the one prediction engine: the page evaluates exactly this
            **count_payload(fit),
        })
    components = list(getattr(source, "component_names", []) or [])
    columns = [source.data[name].to_numpy(dtype=float) for name in components]
    columns += [_run_column(source.data[f.name], f) for f in source.factors]
    runs = np.column_stack(columns) if columns else np.zeros((0, 0))
    runs = runs[np.isfinite(runs).all(axis=1)]
    models = {name: source.models.get(name, "") for name in source.responses}
    return {
        "title": title_of(study),
        "invented": is_invented(study),
        "summary": summary_html(shared, fits),
        "caution": CAUTION,
        "fingerprint": fingerprint(shared.data, models, dict(getattr(shared, "exclusions", {}) or {})),
        "factors": [
            {"name": f.name, "units": f.units, "levels": list(f.levels)} if getattr(f, "levels", ()) else
            {"name": f.name, "units": f.units, "low": float(f.low), "high": float(f.high),
             "center": float(f.center)}
            for f in source.factors
        ],
        "responses": responses,
        "runs": runs.tolist(),  # a mixture study's runs: the component amounts, then the process settings
        **({"mixture": mixture_block(study.mixture, shared.settings)} if components else {}),
    }


def mixture_block(mixture, settings) -> dict:
    """The page's mixture section: the components, their bounds, and the starting blend (the region's centroid)."""
    return {"components": [{"name": c.name, "units": c.units} for c in mixture.components],
            "total": mixture.total, "start": [float(settings[n]) for n in mixture.names]}


ASSETS = Path(__file__).parent / "assets"

#: Characters that could end, comment out or reopen the script element the data sits in (``</script``,
#: ``<!--``, ``<script``, ``-->``), written as JSON escapes; JSON.parse reads them back unchanged.
_SCRIPT_ESCAPES = {"<": "\\u003c", ">": "\\u003e", "&": "\\u0026", "\u2028": "\\u2028", "\u2029": "\\u2029"}


def script_json(content) -> str:
    r"""*content* as JSON that is safe inside a ``<script>`` element, whatever its strings hold.

    Examples
    --------
    >>> script_json({"title": "<!--<script></script>-->"})
    '{"title":"\\u003c!--\\u003cscript\\u003e\\u003c/script\\u003e--\\u003e"}'
    >>> json.loads(script_json({"title": "<!--<script></script>-->"}))["title"]
    '<!--<script></script>-->'
    """
    text = json.dumps(content, allow_nan=False, separators=(",", ":"))
    for char, escaped in _SCRIPT_ESCAPES.items():
        text = text.replace(char, escaped)
    return text


def render(study: Study) -> str:
    """The whole page as one string: the data, the script and the styles inline."""
    content = payload(study)
    data = script_json(content)
    page = "export_mixture" if "mixture" in content else "export_page"  # a mixture study: blends, ternary slice
    parts = {
        "__SCRIPT__": (ASSETS / "export_common.js").read_text(encoding="utf-8") + "\n"
                      + (ASSETS / f"{page}.js").read_text(encoding="utf-8"),
        "__DATA__": data,
        "__SUMMARY__": content["summary"],
        "__CAUTION__": CAUTION,
        "__TITLE__": html.escape(title_of(study)),
    }
    # The page's own styles and body in the shared frame (our assets only), then one pass over the data, so
    # text inside the study (a name, a note) can never be taken for a placeholder.
    style, body = (ASSETS / f"{page}.html").read_text(encoding="utf-8").split("</style>\n", 1)
    template = (ASSETS / "export_frame.html").read_text(encoding="utf-8")
    template = template.replace("__PAGE_STYLE__\n", style.removeprefix("<style>\n")).replace("__PAGE_BODY__\n", body)
    return re.sub("|".join(parts), lambda match: parts[match.group(0)], template)


def write_export(study, output) -> Path:
    """Write the offline export of *study* (a study JSON path or ``"demo"``) to *output*."""
    study = study if isinstance(study, Study) else open_study(study)
    path = Path(output)
    text = render(study)
    tmp = path.with_name(path.name + ".tmp")
    tmp.write_text(text, encoding="utf-8")
    tmp.replace(path)
    return path
