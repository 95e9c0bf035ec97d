"""Regular two-level fractional factorials 2^(k-p): generators as written, or the searched best fraction."""

from __future__ import annotations

import math
import re

from .._errors import LevelwiseError, describe
from .._progress import Reporter
from ._aberration import minimum_aberration
from ._design import Design, _check_count
from ._factorial import build_two_level
from ._factors import as_factors
from ._splitplot import maybe_split_plot
from ._twolevel import block_contrasts, structure_from_runs

_SPLIT = re.compile(r"\s*[:*·]\s*")


def _parse_word(text, names, parameter, generator):
    text = text.strip()
    if not text:
        raise LevelwiseError(f"The generator {generator!r} in '{parameter}' has an empty side.")
    if any(sep in text for sep in ":*·"):
        parts = [t for t in _SPLIT.split(text) if t]
    elif text in names:
        parts = [text]
    elif all(len(n) == 1 for n in names):
        parts = list(text.replace(" ", ""))
    else:
        parts = [text]
    for part in parts:
        if part not in names:
            raise LevelwiseError(
                f"The generator {generator!r} in '{parameter}' names an unknown factor {part!r}. "
                f"Known factors: {', '.join(map(repr, names))}."
            )
    if len(set(parts)) != len(parts):
        raise LevelwiseError(f"The generator {generator!r} in '{parameter}' repeats a factor.")
    return [names.index(part) for part in parts]


def parse_generators(generators, names, parameter="generators"):
    """Parse ``["E=ABCD", "F=-ABC"]`` (or ``"Film = Oven:Dwell"``) into (added index, basic indices, sign).

    Raises
    ------
    LevelwiseError
        Unknown factors, a factor defined twice, a right side using a defined factor, or generators that are
        not independent (two added factors equal to the same column, or to a single basic factor).
    """
    if isinstance(generators, str):
        generators = [g for g in re.split(r"[,;]", generators) if g.strip()]
    try:
        items = list(generators)
    except TypeError:
        raise LevelwiseError(
            f"The '{parameter}' parameter must be a list such as ['E=ABCD']. Got {describe(generators)} instead."
        ) from None
    parsed = []
    for g in items:
        if not isinstance(g, str) or g.count("=") != 1:
            raise LevelwiseError(
                f"Each item of '{parameter}' must look like 'E=ABCD' (added factor = product of basic factors). "
                f"Got {describe(g)} instead."
            )
        lhs, rhs = g.split("=")
        rhs = rhs.strip()
        sign = 1
        if rhs.startswith(("-", "+")):
            sign = -1 if rhs[0] == "-" else 1
            rhs = rhs[1:]
        left = _parse_word(lhs, names, parameter, g)
        if len(left) != 1:
            raise LevelwiseError(f"The left side of generator {g!r} in '{parameter}' must be one factor.")
        parsed.append((left[0], _parse_word(rhs, names, parameter, g), sign, g.strip()))
    added = [a for a, _, _, _ in parsed]
    if len(set(added)) != len(added):
        dup = next(names[a] for a in added if added.count(a) > 1)
        raise LevelwiseError(f"The factor {dup!r} is defined by more than one generator in '{parameter}'.")
    columns = {}
    for _a, rhs, _, text in parsed:
        used = [names[j] for j in rhs if j in added]
        if used:
            raise LevelwiseError(
                f"The generators in '{parameter}' are not independent: {text!r} uses the generated factor(s) "
                f"{used}; write each generator in basic factors only."
            )
        if len(rhs) < 2:
            raise LevelwiseError(
                f"The generators in '{parameter}' are not independent: {text!r} makes a factor equal to a single "
                "factor (a main effect aliased with a main effect). Use a product of at least 2 basic factors."
            )
        key = frozenset(rhs)
        if key in columns:
            raise LevelwiseError(
                f"The generators in '{parameter}' are not independent: {columns[key]!r} and {text!r} give the same "
                "column, so those two factors would be aliased."
            )
        columns[key] = text
    return parsed


class _Scaled(Reporter):
    """A reporter for one run count of the search, passing progress (scaled) and stops to the outer one."""

    def __init__(self, outer, report):
        self.outer, self._report = outer, report
        self.text, self.callback = None, report

    @property
    def stopped(self):
        return self.outer.stopped

    @stopped.setter
    def stopped(self, value):
        if value:
            self.outer.stopped = value

    def report(self, fraction, message=""):
        return self._report(fraction, message) is not False and not self.outer.stopped

    def interrupted(self):
        self.outer.interrupted()


def _check_runs(runs, k):
    runs = _check_count(runs, "runs", 2)
    if runs & (runs - 1):
        raise LevelwiseError(f"The 'runs' parameter must be a power of two (8, 16, 32, ...). Got {runs} instead.")
    if runs < k + 1:
        raise LevelwiseError(
            f"The 'runs' parameter ({runs}) is too small for {k} factors: a two-level fraction needs at least "
            f"k + 1 = {k + 1} runs, i.e. {1 << math.ceil(math.log2(k + 1))} or more."
        )
    return runs


def fractional_factorial(
    factors,
    runs=None,
    generators=None,
    resolution=None,
    center_points=0,
    replicates=1,
    blocks=1,
    randomize=True,
    seed=None,
    progress=None,
) -> Design:
    """Regular two-level fractional factorial 2^(k-p).

    Parameters
    ----------
    factors : list of Factor or int
        The factors (an integer k gives A, B, C, ... skipping I).
    runs : int, optional
        Number of distinct runs, a power of two (4 to 128 for the search).
    generators : list of str, optional
        Generators such as ``["E=ABCD"]`` or ``["Film=Oven:Dwell"]``; a leading ``-`` on the right side gives
        the other half. Checked for independence. Factors not on a left side are the basic factors.
    resolution : int, optional
        Minimum resolution wanted. With *runs*, an error if no fraction of that size reaches it; without *runs*,
        the smallest run count that reaches it.
    center_points, replicates, blocks, randomize, seed
        As in :func:`levelwise.full_factorial`.
    progress : None, bool or callable, optional
        Progress of the search (no search with *generators*): None (default) writes a text line to standard
        error once the search has run for a second; False is silent; True writes it at once; a callable
        ``progress(fraction_done, message)`` is called as the search goes, and returning False stops it with
        the best fraction found so far. Ctrl-C also stops it with the best fraction so far (with a
        :class:`levelwise.SearchStoppedWarning`).

    Returns
    -------
    Design
        With ``generators``, ``defining_relation``, ``resolution``, ``word_length_pattern`` and ``aliases()``.
        ``metadata["search_complete"]`` is False if the bounded search stopped early; then
        ``metadata["stopped"]`` says why (``"budget"``, ``"cancelled"`` by the callback, ``"interrupted"`` by
        Ctrl-C).

    Raises
    ------
    LevelwiseError
        Dependent generators, a run count that is not a power of two or too small for k, or an unreachable
        resolution.

    Examples
    --------
    >>> d = fractional_factorial(5, runs=16, randomize=False)
    >>> d.generators, d.resolution, d.word_length_pattern
    (['E=ABCD'], 5, (0, 0, 1))
    """
    factors = as_factors(factors)
    names = [f.name for f in factors]
    k = len(factors)
    center_points = _check_count(center_points, "center_points", 0)
    replicates = _check_count(replicates, "replicates", 1)
    if resolution is not None:
        resolution = _check_count(resolution, "resolution", 3)
    meta = {}
    if generators is not None:
        parsed = parse_generators(generators, names)
        added = [a for a, _, _, _ in parsed]
        basic = [j for j in range(k) if j not in added]
        m = len(basic)
        if runs is not None and _check_count(runs, "runs", 2) != 1 << m:
            raise LevelwiseError(
                f"The 'runs' parameter ({runs}) disagrees with the generators: {len(parsed)} generators for {k} "
                f"factors give 2^{m} = {1 << m} runs."
            )
        order = basic + added
        ordered = [factors[j] for j in order]
        position = {j: i for i, j in enumerate(basic)}
        masks = [sum(1 << position[j] for j in rhs) for _, rhs, _, _ in parsed]
        signs = [s for _, _, s, _ in parsed]
        design = build_two_level(ordered, m, masks, signs, center_points=center_points, replicates=replicates,
                                 blocks=blocks, randomize=False, seed=seed, kind="fractional factorial")
        # Back to the user's factor order, keeping the generators as written.
        coded = design.coded[names].to_numpy()
        corner = design.table.role.to_numpy() == "corner"
        structure = structure_from_runs(coded[corner], names, block_contrasts(design.table.block.to_numpy()[corner]),
                                        tuple(t for _, _, _, t in parsed))
        result = Design(factors, coded, design.table.role.to_numpy(), design.table.block.to_numpy(),
                        randomize=randomize, seed=seed, standard_order=design.table.standard_order.to_numpy(),
                        kind="fractional factorial", structure=structure,
                        metadata={k_: v for k_, v in design.metadata.items() if k_ == "block_generators"})
        if resolution is not None and (result.resolution or k + 1) < resolution:
            raise LevelwiseError(
                f"The generators give resolution {result.resolution}, below the requested 'resolution' "
                f"{resolution}. Got generators {list(generators)!r}."
            )
        return maybe_split_plot(result, replicates, randomize, seed)
    if runs is None and resolution is None:
        raise LevelwiseError("fractional_factorial needs 'runs', 'generators' or 'resolution'. Got none of them.")
    if runs is not None:
        runs = _check_runs(runs, k)
        if runs > 1 << k:
            raise LevelwiseError(
                f"The 'runs' parameter ({runs}) is more than the {1 << k} distinct runs of {k} factors; use "
                "full_factorial with replicates instead."
            )
        if runs > 128 and runs < (1 << k):
            raise LevelwiseError(f"The 'runs' parameter must be at most 128 for the search. Got {runs} instead.")
        m_values = [min(runs.bit_length() - 1, k)]
    else:
        m_values = [m for m in range(max(2, math.ceil(math.log2(k + 1))), 8) if m <= k]
        if not m_values:
            m_values = [k]
    reporter = Reporter(progress, label=f"Searching fractions of {k} factors")
    masks = None
    for i, m in enumerate(m_values):
        def report(fraction, message, i=i, m=m):
            return reporter.report((i + fraction) / len(m_values), f"{1 << m} runs: {message}")

        masks, _pattern, complete = minimum_aberration(k, m, resolution or 3, progress=_Scaled(reporter, report))
        if masks is not None or reporter.stopped:
            break
    reporter.finish(f"The search for a fraction of {k} factors")
    if masks is None and reporter.stopped:
        raise LevelwiseError(f"The search for a fraction of {k} factors was stopped before it found one.")
    if masks is None:
        wanted = f"{runs} runs" if runs is not None else "up to 128 runs"
        raise LevelwiseError(
            f"No regular fraction of {k} factors in {wanted} reaches resolution {resolution}. Use more runs "
            "or a lower 'resolution'."
        )
    meta["search_complete"] = bool(complete)
    if not complete:
        meta["stopped"] = reporter.stopped or "budget"
    design = build_two_level(factors, m, masks, [1] * len(masks), center_points=center_points,
                             replicates=replicates, blocks=blocks, randomize=randomize, seed=seed,
                             kind="fractional factorial", metadata=meta)
    return maybe_split_plot(design, replicates, randomize, seed)  # hard-to-change factors (issue 13)
