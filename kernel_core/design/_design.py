"""Designed experiments: the :class:`Design` object, two-level full factorials and blocking."""

from __future__ import annotations

import numpy as np
import pandas as pd

from .._errors import LevelwiseError, describe
from ._factors import as_factors
from ._twolevel import TwoLevelStructure

#: Columns that come before the factor columns in :attr:`Design.table`.
META_COLUMNS = ("run", "std_order", "block", "point_type")


def _check_count(value, parameter: str, minimum: int) -> int:
    if isinstance(value, bool) or not isinstance(value, (int, np.integer)) or value < minimum:
        raise LevelwiseError(
            f"The '{parameter}' parameter must be an integer >= {minimum}. Got {describe(value)} instead."
        )
    return int(value)


def _check_seed(seed):
    if seed is not None and (isinstance(seed, bool) or not isinstance(seed, (int, np.integer)) or seed < 0):
        raise LevelwiseError(f"The 'seed' parameter must be None or an integer >= 0. Got {describe(seed)} instead.")
    return seed


class Design:
    """A planned set of runs.

    Parameters
    ----------
    factors : list of Factor or int
    coded : array (n, k)
        Coded settings, one row per run in standard order.
    point_type : sequence of str
        ``"factorial"``, ``"center"``, ``"axial"``, ``"edge"``, ``"optimal"``, ...
    block : sequence of int, optional
        Block number per run (default all 1).
    randomize : bool, default True
        Put the runs in a random order within each block, blocks kept in sequence.
    seed : int, optional
        Seed of the randomisation (reproducible).
    std_order : sequence of int, optional
        Standard-order number per row (default 1..n).
    kind : str, optional
        What built the design, e.g. ``"fractional factorial"``.
    structure : TwoLevelStructure, optional
        Defining relation and block confounding of a regular two-level design.
    metadata : dict, optional
        Extra facts (axial distance, efficiencies, ...), shown in :attr:`metadata`.

    Attributes
    ----------
    factors : tuple of Factor
        The factors, in column order.
    table : pandas.DataFrame
        One row per run in run (randomised) order, with columns ``run``,
        ``std_order``, ``block``, ``point_type`` and one column per factor in
        natural units.
    coded : pandas.DataFrame
        The same runs in coded units (-1 at low, +1 at high), one column per factor.
    """

    def __init__(
        self,
        factors,
        coded: np.ndarray,
        point_type,
        block=None,
        *,
        randomize=True,
        seed=None,
        std_order=None,
        kind: str = "custom",
        structure: TwoLevelStructure | None = None,
        metadata: dict | None = None,
    ):
        self.factors = as_factors(factors)
        seed = _check_seed(seed)
        coded = np.asarray(coded, dtype=float)
        n = coded.shape[0]
        if coded.ndim != 2 or coded.shape[1] != len(self.factors):
            raise LevelwiseError(
                f"The 'coded' array must have one column per factor ({len(self.factors)}). "
                f"Got shape {coded.shape} instead."
            )
        point_type = np.asarray(point_type, dtype=object)
        block = np.ones(n, dtype=int) if block is None else np.asarray(block, dtype=int)
        std_order = np.arange(1, n + 1) if std_order is None else np.asarray(std_order, dtype=int)
        order = np.arange(n)
        if randomize:
            rng = np.random.default_rng(seed)
            # Randomise within each block, blocks kept in sequence.
            order = np.concatenate([rng.permutation(np.flatnonzero(block == b)) for b in np.unique(block)])
        natural = {f.name: f.to_natural(coded[order, j]) for j, f in enumerate(self.factors)}
        self.table = pd.DataFrame(
            {
                "run": np.arange(1, n + 1),
                "std_order": std_order[order],
                "block": block[order],
                "point_type": point_type[order],
                **natural,
            }
        )
        self.coded = pd.DataFrame(coded[order], columns=[f.name for f in self.factors])
        self.kind = kind
        self.seed = seed
        self.randomized = bool(randomize)
        self._structure = structure
        self._metadata = dict(metadata or {})

    @property
    def factor_names(self) -> list[str]:
        return [f.name for f in self.factors]

    @property
    def metadata(self) -> dict:
        """Facts about the design (kind, seed, axial distance, efficiencies, ...); a fresh copy each time."""
        out = {"kind": self.kind, "runs": len(self), "blocks": int(self.table["block"].nunique()),
               "seed": self.seed, "randomized": self.randomized}
        if self._structure is not None:
            out["generators"] = list(self.generators)
            out["resolution"] = self.resolution
            out["word_length_pattern"] = list(self.word_length_pattern)
            out["block_confounded"] = self.block_confounded
        out.update(self._metadata)
        return out

    # -- regular two-level structure ---------------------------------------------------------------
    @property
    def is_regular(self) -> bool:
        """True for a regular two-level design (full factorial or fraction) with a defining relation."""
        return self._structure is not None

    def _need_structure(self, what):
        if self._structure is None:
            raise LevelwiseError(
                f"'{what}' is defined for regular two-level designs only; this is a {self.kind} design. "
                "Use levelwise.evaluate(design, model) for its alias matrix."
            )
        return self._structure

    @property
    def generators(self):
        """Generators such as ``["E=ABCD"]`` (empty for a full factorial; None for other designs)."""
        return None if self._structure is None else list(self._structure.generators)

    @property
    def defining_relation(self):
        """Words w of the defining relation I = w1 = w2 = ..., shortest first (None for non-regular designs)."""
        return None if self._structure is None else self._structure.defining_relation()

    @property
    def resolution(self):
        """Resolution (length of the shortest word); None for a full factorial or a non-regular design."""
        return None if self._structure is None else self._structure.resolution()

    @property
    def word_length_pattern(self):
        """(A3, A4, ..., Ak): number of words of each length (None for non-regular designs)."""
        return None if self._structure is None else self._structure.word_length_pattern()

    @property
    def block_confounded(self) -> list:
        """Effects confounded with blocks (lowest order of each alias class); empty without blocks."""
        return [] if self._structure is None else self._structure.block_confounded()

    def aliases(self, max_order: int = 3) -> dict:
        """Each effect up to *max_order* mapped to the effects (up to *max_order*) it is aliased with.

        A leading ``-`` marks a negative alias; ``"Block"`` marks confounding with blocks.

        Examples
        --------
        >>> from levelwise import fractional_factorial
        >>> d = fractional_factorial(3, generators=["C=AB"], randomize=False)
        >>> d.aliases(max_order=2)["A"]
        ['BC']
        """
        _check_count(max_order, "max_order", 1)
        return self._need_structure("aliases").aliases(max_order)

    def to_run_sheet(self, responses=("y",)) -> pd.DataFrame:
        """Run sheet in run order: planned settings, blank achieved-setting and response columns.

        See :func:`levelwise.design.run_sheet`.
        """
        from ._runsheet import run_sheet

        return run_sheet(self, responses=responses)

    def __len__(self) -> int:
        return len(self.table)

    def __repr__(self) -> str:
        extra = f", resolution {self.resolution}" if self.resolution else ""
        return f"<Design ({self.kind}): {len(self)} runs, factors {self.factor_names}{extra}>"
