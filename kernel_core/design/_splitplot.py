"""Split-plot run order: whole plots of hard-to-change factors and the restricted randomisation.

A factor declared ``Factor(..., hard_to_change=True)`` is reset only between whole plots. A whole plot is
one setting of the hard-to-change factors within one replicate (and one block); its runs take every
setting of the easy factors that goes with it. The randomisation is restricted: within each block the
whole plots come in random order, the runs of each whole plot are in random order, and the runs of a
whole plot follow one another in run order.
"""

from __future__ import annotations

import inspect

import numpy as np

from .._errors import LevelwiseError, describe

#: Name of the design-table column that numbers the whole plots (1, 2, ... in run order).
WHOLE_PLOT_COLUMN = "whole_plot"


def _column(table, *names):
    for name in names:
        if name in table.columns:
            return table[name].to_numpy()
    raise KeyError(names[0])


def _standard_order_keyword(design_cls):
    params = inspect.signature(design_cls.__init__).parameters
    return "standard_order" if "standard_order" in params else "std_order"


def hard_to_change_factors(factors) -> list[str]:
    """Names of the factors declared hard to change."""
    return [f.name for f in factors if getattr(f, "hard_to_change", False)]


def split_plot_order(design, replicates: int = 1, randomize: bool = True, seed=None, plots=None):
    """The split-plot version of a two-level *design*: whole plots and the restricted run order.

    Whole plots are the distinct settings of the hard-to-change factors within each replicate and block
    (centre points of a block form one whole plot of their own). With *randomize*, the whole plots of each
    block come in random order and the runs within each whole plot in random order (seeded by *seed*);
    blocks stay in sequence and each whole plot's runs are contiguous. Without it, whole plots and runs
    follow standard order. *plots* (one label per row of ``design.table``) gives the whole plots explicitly,
    as an optimal split-plot design does.

    Returns a new Design whose table carries a ``whole_plot`` column (numbered 1, 2, ... in run order) and
    whose metadata lists the hard-to-change factors and the number of whole plots.
    """
    from ._design import Design

    hard = hard_to_change_factors(design.factors)
    if not hard:
        raise LevelwiseError(
            "A split-plot design needs at least one factor declared hard_to_change=True. Got none among "
            f"{design.factor_names}."
        )
    if len(hard) == len(design.factors):
        raise LevelwiseError(
            f"Every factor {hard} is hard to change: a split-plot design needs at least one easy factor to vary "
            "within a whole plot. Declare the easy factors with hard_to_change=False."
        )
    table = design.table
    standard = _column(table, "standard_order", "std_order")
    role = _column(table, "role", "point_type")
    block = table["block"].to_numpy()
    order = np.argsort(standard, kind="stable")
    coded = design.coded.to_numpy()[order]
    standard, role, block = standard[order], role[order], block[order]
    hard_cols = [design.factor_names.index(name) for name in hard]
    corner = np.isin(role, ("corner", "factorial"))
    per_replicate = max(1, int(corner.sum()) // max(1, replicates))
    replicate = np.where(corner, (np.argsort(np.argsort(standard, kind="stable")) // per_replicate), -1)
    keys = [
        (int(b), int(r), tuple(float(v) for v in row))
        for b, r, row in zip(block, replicate, coded[:, hard_cols])
    ]
    if plots is not None:
        keys = [(int(b), label) for b, label in zip(block, np.asarray(plots)[order])]
    distinct = {}
    plot_of = np.array([distinct.setdefault(key, len(distinct)) for key in keys])
    rng = np.random.default_rng(seed) if randomize else None
    run_order = []
    for b in sorted(set(block.tolist())):
        plots = sorted({int(p) for p, bb in zip(plot_of, block) if bb == b})
        if rng is not None:
            plots = [plots[i] for i in rng.permutation(len(plots))]
        for plot in plots:
            members = np.flatnonzero(plot_of == plot)
            run_order.extend(members[rng.permutation(len(members))] if rng is not None else members)
    run_order = np.asarray(run_order, dtype=int)
    kw = {_standard_order_keyword(Design): standard[run_order]}
    meta = {key: value for key, value in design.metadata.items()
            if key not in ("kind", "runs", "blocks", "seed", "randomized", "generators", "resolution",
                           "word_length_pattern", "block_confounded")}
    result = Design(design.factors, coded[run_order], role[run_order], block[run_order], randomize=False,
                    seed=design.seed if seed is None else seed, kind=design.kind, structure=design._structure,
                    metadata=meta, **kw)
    # Whole plots numbered 1, 2, ... in the order they are run.
    first_seen = {}
    numbers = np.array([first_seen.setdefault(int(p), len(first_seen) + 1) for p in plot_of[run_order]])
    position = list(result.table.columns).index("block") + 1
    result.table.insert(position, WHOLE_PLOT_COLUMN, numbers)
    result.randomized = bool(randomize)
    result.seed = seed
    result._metadata.update(
        {
            "whole_plot_effects": _whole_plot_effects(result, numbers),
            "hard_to_change": hard,
            "whole_plots": int(numbers.max()),
            "randomization": "restricted: whole plots in random order within each block, runs in random order "
            "within each whole plot" if randomize else "none (standard order)",
        }
    )
    return result


def _whole_plot_effects(design, numbers, max_order=2):
    """Main effects and two-factor interactions whose columns are constant within every whole plot.

    These are estimated from whole-plot totals and tested against the whole-plot error.
    """
    import itertools

    coded = design.coded.to_numpy()
    names = design.factor_names
    joiner = "" if all(len(n) == 1 for n in names) else ":"
    out = []
    for order in range(1, max_order + 1):
        for combo in itertools.combinations(range(len(names)), order):
            column = coded[:, list(combo)].prod(axis=1)
            spread = [np.ptp(column[numbers == w]) for w in np.unique(numbers)]
            if max(spread) == 0:
                out.append(joiner.join(names[j] for j in combo))
    return out


def maybe_split_plot(design, replicates: int = 1, randomize: bool = True, seed=None):
    """*design* unchanged when no factor is hard to change, else :func:`split_plot_order` of it."""
    if not hard_to_change_factors(design.factors):
        return design
    from ._splitplot_checks import warn_few_whole_plots

    result = split_plot_order(design, replicates=replicates, randomize=randomize, seed=seed)
    warn_few_whole_plots(result, stacklevel=4)
    return result


def check_whole_plot_column(data, column):
    """The whole-plot labels of *data[column]* (an array), refusing a missing column or empty labels."""
    if not isinstance(column, str) or column not in data.columns:
        raise LevelwiseError(
            f"The 'whole_plot' parameter must name a column of the data {list(map(str, data.columns))}. "
            f"Got {describe(column)} instead."
        )
    values = data[column]
    empty = values.isna().to_numpy()
    if empty.any():
        row = int(np.flatnonzero(empty)[0])
        raise LevelwiseError(
            f"The whole-plot column {column!r} is empty in row {row + 1}; every run needs its whole plot."
        )
    return values.to_numpy()
