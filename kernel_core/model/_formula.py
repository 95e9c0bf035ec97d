"""Model formulas in Wilkinson notation, compiled to an exponent matrix.

A model over k factors with p terms is held as a p x k matrix of non-negative
integer exponents: the row of a term gives the power of each factor in it.
The intercept is the all-zero row. Evaluating the model at a setting is then a
product of powers, with no formula parsing on the interactive path.

Factor names typed by users can clash with formula helpers (``C``, ``I``,
``Q``) or contain spaces, so each name is mapped to a safe identifier
(``f0``, ``f1``, ...) before the formula reaches the parser (patsy).
Names that are not plain identifiers can be written in backticks:
```` `film thickness` + `oven set-point` ````.
"""

from __future__ import annotations

import ast
import re
from dataclasses import dataclass

import numpy as np

from .._errors import LevelwiseError, describe

#: Model presets: main effects; plus every two-factor interaction; plus every pure quadratic.
PRESETS = ("main_effects", "two_factor_interactions", "full_second_order")
#: Names used before format 3 of the study file, refused with a message naming the new ones.
RETIRED_PRESETS = {"linear": "main_effects", "interactions": "two_factor_interactions",
                   "quadratic": "full_second_order"}

_TOKEN = re.compile(r"`([^`]*)`|([^\W\d]\w*)|(\S)", re.UNICODE)


@dataclass(frozen=True, eq=False)
class ModelSpec:
    """A parsed model: term names and the exponent matrix over the factors.

    Attributes
    ----------
    formula : str
        The formula or preset as given.
    factor_names : tuple of str
        Factor order of the exponent columns.
    exponents : numpy.ndarray
        (p, k) integer exponents, one row per term, intercept (all zeros) first when present.
    terms : tuple of str
        Display names, ``"Intercept"``, ``"A"``, ``"A:B"``, ``"A^2"``.
    """

    formula: str
    factor_names: tuple
    exponents: np.ndarray
    terms: tuple

    @property
    def has_intercept(self) -> bool:
        return bool(len(self.exponents)) and not self.exponents[0].any()

    @property
    def p(self) -> int:
        return len(self.terms)


def monomials(coded: np.ndarray, exponents: np.ndarray, dtype=float) -> np.ndarray:
    """Evaluate every term (a row of *exponents*) at each row of *coded*: an (n, p) matrix.

    Each power of each factor is computed once and shared by the terms that use it. The result is
    column-major, as LAPACK's QR wants it.
    """
    coded = np.atleast_2d(np.asarray(coded, dtype=dtype))
    m, p = coded.shape[0], exponents.shape[0]
    k = coded.shape[1]
    if m * exponents.size <= 50_000 and k:
        # Few rows (the interactive path): one power table for all factors, one gather, one product.
        top = int(exponents.max(initial=0))
        table = np.empty((m, k, top + 1), dtype=dtype)
        table[:, :, 0] = 1.0
        for d in range(1, top + 1):
            table[:, :, d] = table[:, :, d - 1] * coded
        return np.asfortranarray(table[:, np.arange(k)[None, :], exponents].prod(axis=2))
    # Many rows (building a model matrix): contiguous power columns per factor, one product per term.
    out = np.empty((m, p), dtype=dtype, order="F")
    powers = {}
    for i in np.flatnonzero(exponents.any(axis=0)):
        first = np.ascontiguousarray(coded[:, i])
        # x ** d rounds once (repeated products would round d - 1 times).
        powers[i] = [None, first] + [first**d for d in range(2, int(exponents[:, i].max()) + 1)]
    for j, row in enumerate(exponents):
        factors = np.flatnonzero(row)
        if not len(factors):
            out[:, j] = 1.0
            continue
        column = out[:, j]
        np.copyto(column, powers[factors[0]][row[factors[0]]])
        for i in factors[1:]:
            np.multiply(column, powers[i][row[i]], out=column)
    return out


def term_name(row, factor_names) -> str:
    """Display name of one exponent row, e.g. ``A:B`` or ``A^2``."""
    parts = [
        name if power == 1 else f"{name}^{int(power)}"
        for name, power in zip(factor_names, row)
        if power
    ]
    return ":".join(parts) if parts else "Intercept"


def preset_exponents(preset: str, k: int) -> np.ndarray:
    rows = [np.zeros(k, dtype=int)]
    eye = np.eye(k, dtype=int)
    rows += list(eye)
    if preset in ("two_factor_interactions", "full_second_order"):
        rows += [eye[i] + eye[j] for i in range(k) for j in range(i + 1, k)]
    if preset == "full_second_order":
        rows += list(2 * eye)
    return np.array(rows, dtype=int)


def _substitute(formula: str, factor_names) -> str:
    """Replace factor names by safe identifiers f0, f1, ...; reject unknown names."""
    index = {name: i for i, name in enumerate(factor_names)}
    out = []
    tokens = list(_TOKEN.finditer(formula))
    for position, match in enumerate(tokens):
        quoted, ident, other = match.groups()
        if other is not None:
            out.append(other)
            continue
        name = quoted if quoted is not None else ident
        following = tokens[position + 1].group(3) if position + 1 < len(tokens) else None
        if quoted is None and name == "I" and following == "(":
            # I( is always the power helper, even beside a factor called I: factors are never called.
            out.append("I")
        elif name in index:
            out.append(f" f{index[name]} ")
        else:
            known = ", ".join(repr(n) for n in factor_names)
            raise LevelwiseError(
                f"The model term {name!r} names an unknown factor. Known factors: {known}. "
                f"Got model {formula!r}."
            )
    return "".join(out)


def _exponents_of_code(code: str, k: int, formula: str) -> np.ndarray:
    """Exponents of one patsy factor code: ``f0`` or ``I(f0 ** 2)`` / ``I(f0 * f1)``."""
    row = np.zeros(k, dtype=int)
    try:
        tree = ast.parse(code, mode="eval").body
    except SyntaxError:
        raise LevelwiseError(f"The model {formula!r} has a term that could not be read: {code!r}.") from None
    if isinstance(tree, ast.Call) and isinstance(tree.func, ast.Name) and tree.func.id == "I" and len(tree.args) == 1:
        tree = tree.args[0]

    def visit(node, power):
        if isinstance(node, ast.Name) and re.fullmatch(r"f\d+", node.id):
            row[int(node.id[1:])] += power
        elif isinstance(node, ast.BinOp) and isinstance(node.op, ast.Mult):
            visit(node.left, power)
            visit(node.right, power)
        elif (
            isinstance(node, ast.BinOp)
            and isinstance(node.op, ast.Pow)
            and isinstance(node.right, ast.Constant)
            and isinstance(node.right.value, int)
            and not isinstance(node.right.value, bool)
            and 1 <= node.right.value <= 10
        ):
            visit(node.left, power * node.right.value)
        else:
            raise LevelwiseError(
                f"The model {formula!r} has a term that is not a product of factor powers. "
                "Allowed: A, A:B, I(A**2), I(A*B). "
                f"Got {ast.unparse(node)!r} instead."
            )

    visit(tree, 1)
    return row


def parse_model(model: str, factor_names) -> ModelSpec:
    """Parse a Wilkinson formula or preset over *factor_names* into a :class:`ModelSpec`.

    Parameters
    ----------
    model : str
        ``"A + B + A:B"``, ``"(A+B+C)**2"``, ``"A*B"``, ``"I(A**2)"``, ``"- 1"`` or ``"0 +"``
        to drop the intercept; or a preset ``"main_effects"``, ``"two_factor_interactions"``
        (main effects and every two-factor interaction), ``"full_second_order"`` (those and every
        pure quadratic). A left-hand side (``"y ~ ..."``) is ignored. Terms keep the names as
        written (``"B:A"`` stays ``B:A``).
    factor_names : sequence of str

    Examples
    --------
    >>> parse_model("(A+B)**2", ["A", "B"]).terms
    ('Intercept', 'A', 'B', 'A:B')
    >>> parse_model("full_second_order", ["x", "y"]).terms
    ('Intercept', 'x', 'y', 'x:y', 'x^2', 'y^2')
    """
    factor_names = tuple(factor_names)
    k = len(factor_names)
    if not isinstance(model, str) or not model.strip():
        raise LevelwiseError(
            "The 'model' parameter must be a formula such as 'A + B + A:B' or one of "
            f"{', '.join(PRESETS)}. Got {describe(model)} instead."
        )
    text = model.strip()
    written = {}
    if text in RETIRED_PRESETS:
        raise LevelwiseError(
            f"The model preset {text!r} has a new name: use {RETIRED_PRESETS[text]!r}. "
            f"The presets are {', '.join(repr(p) for p in PRESETS)}."
        )
    if text in PRESETS:
        exponents = preset_exponents(text, k)
    elif text.startswith("scheffe_"):  # mixture presets (issue 12): no intercept, every factor a component
        from ._mixture_terms import scheffe_exponents

        exponents = scheffe_exponents(text, k)
    else:
        from patsy import ModelDesc, PatsyError  # imported here: only formulas need it

        rhs = text.split("~", 1)[1] if "~" in text else text
        safe = _substitute(rhs, factor_names)
        try:
            desc = ModelDesc.from_formula(safe)
        except PatsyError as exc:
            raise LevelwiseError(f"The model {model!r} could not be parsed: {exc.message}") from None
        except Exception as exc:  # patsy's tokenizer trips an assert on some input, e.g. "&"
            raise LevelwiseError(f"The model {model!r} could not be parsed ({type(exc).__name__}).") from None
        rows = []
        for term in desc.rhs_termlist:
            row = np.zeros(k, dtype=int)
            parts = []
            for factor in term.factors:
                part = _exponents_of_code(factor.code, k, model)
                if (row > 0)[part > 0].any():
                    parts = None  # a factor twice (A:I(A**2)): name the product in factor order
                elif parts is not None:
                    parts.append(term_name(part, factor_names))
                row += part
            rows.append(row)
            if parts and row.tobytes() not in written:
                written[row.tobytes()] = ":".join(parts)  # the name as the user wrote it
        if not rows:
            raise LevelwiseError(f"The model {model!r} has no terms.")
        exponents = np.array(rows, dtype=int)
    # Keep first occurrence of duplicate terms (e.g. A:B and I(A*B)); intercept first.
    _, first = np.unique(exponents, axis=0, return_index=True)
    exponents = exponents[np.sort(first)]
    order = np.argsort([row.any() for row in exponents], kind="stable")
    exponents = exponents[order]
    terms = tuple(written.get(row.tobytes()) or term_name(row, factor_names) for row in exponents)
    return ModelSpec(formula=model, factor_names=factor_names, exponents=exponents, terms=terms)


def names_in_model(model: str) -> list[str]:
    """The identifiers (candidate factor names) a formula mentions, in order."""
    names = []
    tokens = list(_TOKEN.finditer(model.split("~", 1)[-1]))
    for position, match in enumerate(tokens):
        quoted, ident, _ = match.groups()
        name = quoted if quoted is not None else ident
        if name is None:
            continue
        following = tokens[position + 1].group(3) if position + 1 < len(tokens) else None
        if quoted is None and name == "I" and following == "(":
            continue
        if name not in names:
            names.append(name)
    return names
