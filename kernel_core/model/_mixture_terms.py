"""Terms of mixture models: the Scheffé canonical polynomials and mixture-process crossings.

Scheffé (1958), "Experiments with mixtures", *JRSS B* 20, 344-360: the canonical polynomials have no intercept
(the proportions sum to 1, so a constant is the sum of the linear blending terms):

* ``scheffe_linear``: sum b_i x_i
* ``scheffe_quadratic``: + sum b_ij x_i x_j
* ``scheffe_special_cubic``: + sum b_ijk x_i x_j x_k
* ``scheffe_cubic``: + sum d_ij x_i x_j (x_i - x_j) + sum b_ijk x_i x_j x_k

A model here is a matrix of monomial exponents, so the full cubic's ``x_i x_j (x_i - x_j)`` (a difference of two
monomials) is fitted through the monomial ``x_i^2 x_j`` instead. On the simplex both span the same polynomials
(``x_i x_j^2 = x_i x_j - x_i^2 x_j - sum_k x_i x_j x_k``); :meth:`MixtureFit.coefficients_proportions` reports
the canonical form.
"""

from __future__ import annotations

import itertools

import numpy as np

from .._errors import LevelwiseError, describe

SCHEFFE_PRESETS = ("scheffe_linear", "scheffe_quadratic", "scheffe_special_cubic", "scheffe_cubic")
PROCESS_PRESETS = ("main_effects", "two_factor_interactions", "full_second_order")
_NEXT = dict(zip(SCHEFFE_PRESETS, SCHEFFE_PRESETS[1:]))


def scheffe_exponents(preset: str, q: int) -> np.ndarray:
    """Exponent rows (p, q) of a Scheffé preset over q components (the fitted monomials)."""
    if preset not in SCHEFFE_PRESETS:
        raise LevelwiseError(f"The mixture model must be one of {list(SCHEFFE_PRESETS)}. Got {describe(preset)}.")
    eye = np.eye(q, dtype=int)
    rows = list(eye)
    if preset != "scheffe_linear":
        rows += [eye[i] + eye[j] for i, j in itertools.combinations(range(q), 2)]
    if preset == "scheffe_cubic":
        rows += [2 * eye[i] + eye[j] for i, j in itertools.combinations(range(q), 2)]
    if preset in ("scheffe_special_cubic", "scheffe_cubic"):
        rows += [eye[i] + eye[j] + eye[k] for i, j, k in itertools.combinations(range(q), 3)]
    return np.array(rows, dtype=int).reshape(-1, q)


def scheffe_cubic_canonical(proportions: np.ndarray) -> tuple:
    """The canonical full-cubic columns at *proportions* (n, q) and their names (``A:B:(A-B)`` for d_ij)."""
    x = np.atleast_2d(proportions)
    q = x.shape[1]
    pairs = list(itertools.combinations(range(q), 2))
    triples = list(itertools.combinations(range(q), 3))
    cols = [x[:, i] for i in range(q)] + [x[:, i] * x[:, j] for i, j in pairs]
    cols += [x[:, i] * x[:, j] * (x[:, i] - x[:, j]) for i, j in pairs]
    cols += [x[:, i] * x[:, j] * x[:, k] for i, j, k in triples]
    return np.column_stack(cols), (pairs, triples)


def process_exponents(model, names) -> np.ndarray:
    """Process-model rows (no intercept row) over the process factor *names*."""
    k = len(names)
    eye = np.eye(k, dtype=int)
    if model in PROCESS_PRESETS:
        rows = list(eye)
        if model != "main_effects":
            rows += [eye[i] + eye[j] for i, j in itertools.combinations(range(k), 2)]
        if model == "full_second_order":
            rows += list(2 * eye)
        return np.array(rows, dtype=int).reshape(-1, k)
    if isinstance(model, str):
        from ._formula import parse_model

        E = parse_model(model, names).exponents
        return E[E.any(axis=1)]
    raise LevelwiseError(f"The process model must be one of {list(PROCESS_PRESETS)} or a formula over the process "
                         f"factors {list(names)}. Got {describe(model)}.")


def split_crossed(model):
    """A crossed model written as text, ``"scheffe_quadratic * main_effects"``, as the pair ``(preset, process
    model)``; any other model is returned unchanged. (How a study file records a crossed mixture-process model.)"""
    if isinstance(model, str) and "*" in model:
        left, _, right = model.partition("*")
        if left.strip() in SCHEFFE_PRESETS and right.strip():
            return (left.strip(), right.strip())
    return model


def model_exponents(model, components, process=()) -> np.ndarray:
    """Exponent rows over ``components + process`` for a mixture *model*; no intercept row.

    *model* is a Scheffé preset (mixture terms only), a pair ``(scheffe preset, process model)`` (every mixture
    term times 1 and times every process term: the crossed mixture-process model), or a Wilkinson formula over
    the component and process names (its intercept, aliased with the sum of the linear blending terms, is
    dropped).
    """
    components, process = list(components), list(process)
    q, k = len(components), len(process)
    model = split_crossed(model)
    if isinstance(model, str) and model.strip() in SCHEFFE_PRESETS:
        mix = scheffe_exponents(model.strip(), q)
        return np.hstack([mix, np.zeros((len(mix), k), dtype=int)])
    if isinstance(model, tuple) and len(model) == 2:
        mix = scheffe_exponents(model[0], q)
        if not k:
            raise LevelwiseError(f"The model {model!r} crosses with a process model, but there are no process "
                                 "factors. Use the Scheffé preset alone.")
        proc = np.vstack([np.zeros((1, k), dtype=int), process_exponents(model[1], process)])
        rows = [np.concatenate([m, p]) for m in mix for p in proc]
        rows.sort(key=lambda r: (int(r[q:].sum() > 0), int(r[q:].sum()), int(r[:q].sum())))
        return np.array(rows, dtype=int)
    if isinstance(model, str) and model.strip():
        from ._formula import parse_model

        E = parse_model(model, components + process).exponents
        E = E[E.any(axis=1)]
        if not len(E):
            raise LevelwiseError(f"The mixture model {model!r} has no terms.")
        return E
    raise LevelwiseError(
        f"The mixture model must be one of {list(SCHEFFE_PRESETS)}, a pair (Scheffé preset, process model) or a "
        f"formula over the components. Got {describe(model)}."
    )


def next_order(model, components, process=()) -> np.ndarray:
    """Left-out terms for the alias matrix: those of the next Scheffé preset (or all two-way products)."""
    q = len(components)
    if isinstance(model, str) and model.strip() in _NEXT:
        E = scheffe_exponents(_NEXT[model.strip()], q)
        return np.hstack([E, np.zeros((len(E), len(process)), dtype=int)])
    names = list(components) + list(process)
    eye = np.eye(len(names), dtype=int)
    return np.array([eye[i] + eye[j] for i, j in itertools.combinations(range(len(names)), 2)], dtype=int)


def formula_text(exponents, names) -> str:
    """A no-intercept Wilkinson formula for the exponent rows (every name in backticks)."""
    from ._reduce import formula_of

    return formula_of(exponents, names)


__all__ = ["PROCESS_PRESETS", "SCHEFFE_PRESETS", "model_exponents", "scheffe_exponents", "split_crossed"]
