"""Fold-over of a two-level design: the mirrored runs as a new stage."""

from __future__ import annotations

import math

import numpy as np

from .._errors import LevelwiseError, describe
from ._design import Design
from ._twolevel import structure_from_runs


def fold_over(design: Design, factor=None, *, as_block=False, randomize=True, seed=None) -> Design:
    """Add the fold-over of a two-level design: every sign reversed, or only one factor's.

    Parameters
    ----------
    design : Design
        A two-level design (centre points are carried over once, with the original runs).
    factor : str, optional
        Fold on this factor only (its column reversed); by default all signs are reversed.
    as_block : bool, default False
        Put the new runs in a new block (block numbers continue after the original ones).
    randomize, seed
        Randomisation of the combined design, within blocks.

    Returns
    -------
    Design
        The combined design, twice the factorial runs, with its new generators, resolution and alias structure
        when it is a regular fraction (confounding with the fold block is reported in ``block_confounded``).

    Examples
    --------
    >>> from levelwise import fractional_factorial
    >>> d = fractional_factorial(7, runs=8, randomize=False)
    >>> d.resolution, fold_over(d, randomize=False).resolution
    (3, 4)
    """
    if not isinstance(design, Design):
        raise LevelwiseError(f"The 'design' parameter must be a Design. Got {describe(design)} instead.")
    names = design.factor_names
    coded = design.coded.to_numpy()
    ptype = design.table.point_type.to_numpy()
    block = design.table.block.to_numpy()
    std = design.table.std_order.to_numpy()
    corner = ptype == "factorial"
    if not corner.any() or not np.all(np.isin(coded[corner], (-1.0, 1.0))):
        raise LevelwiseError("fold_over needs a two-level design with factorial runs at -1/+1.")
    flip = np.full(len(names), -1.0)
    if factor is not None:
        if factor not in names:
            raise LevelwiseError(
                f"The 'factor' parameter must name a factor of the design {names}. Got {describe(factor)} instead."
            )
        flip = np.ones(len(names))
        flip[names.index(factor)] = -1.0
    order = np.argsort(std, kind="stable")
    coded, ptype, block, corner = coded[order], ptype[order], block[order], corner[order]
    folded = coded[corner] * flip
    new_block = block[corner] + (block.max() if as_block else 0)
    all_coded = np.vstack([coded, folded])
    all_ptype = np.concatenate([ptype, np.array(["factorial"] * len(folded), dtype=object)])
    all_block = np.concatenate([block, new_block])
    corners_all = np.vstack([coded[corner], folded])
    blocks_corner = np.concatenate([block[corner], new_block])
    labels = np.unique(blocks_corner)
    block_cols = None
    if len(labels) > 1 and (len(labels) & (len(labels) - 1)) == 0:
        index = np.searchsorted(labels, blocks_corner)
        block_cols = np.column_stack(
            [np.where(index >> i & 1, -1.0, 1.0) for i in range(int(math.log2(len(labels))))]
        )
    structure = structure_from_runs(corners_all, names, block_cols)
    what = "full fold-over" if factor is None else f"fold-over on {factor}"
    return Design(design.factors, all_coded, all_ptype, all_block, randomize=randomize, seed=seed,
                  kind=f"{design.kind} + {what}", structure=structure, metadata={"fold": what})

