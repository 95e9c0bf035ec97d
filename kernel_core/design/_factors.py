"""Experimental factors and the coded <-> natural conversion."""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .._errors import LevelwiseError, describe

_LETTERS = "ABCDEFGHJKLMNOPQRSTUVWXYZ"  # I is skipped: it reads as 1 and as the identity


@dataclass(frozen=True)
class Factor:
    """An experimental factor: continuous (``low``/``high``) or categorical (``levels``).

    Parameters
    ----------
    name : str
        Non-empty name, unique within a study. Any Unicode text is allowed.
    low, high : float
        For a continuous factor: the natural-unit settings coded as -1 and +1. ``low`` must be below ``high``.
    units : str, optional
        Units shown beside the name, e.g. ``"°C"``.
    levels : sequence, optional
        For a categorical factor (give it instead of ``low``/``high``): at least 2 distinct levels, e.g.
        ``["steel", "brass"]``. In two-level designs the first level is coded -1 and the second +1.
    hard_to_change : bool, default False
        True for a factor that is slow or costly to reset (a furnace set-point, a mould). Two-level designs
        then hold it constant over whole plots and restrict the randomisation (split-plot designs).
        For a categorical factor (give it instead of ``low``/``high``): at least 2 distinct levels in any
        order, e.g. ``["steel", "brass", "bronze"]``. A design table codes level i of L as its position
        -1 + 2i/(L-1) on [-1, +1] (first level -1, last +1; a label, not a quantity: models give a
        categorical factor L-1 contrast columns).
    n_levels : int, optional
        For a continuous factor: the number of equally spaced settings from ``low`` to ``high`` that general
        designs use (coded -1 .. +1); ``None`` leaves the settings to each design.

    Examples
    --------
    >>> oven = Factor("Oven", 160, 200, units="°C")
    >>> oven.to_coded(190)
    0.5
    >>> oven.to_natural(-1)
    160.0
    >>> metal = Factor("Metal", levels=["steel", "brass"])
    >>> metal.is_categorical, metal.levels, metal.to_natural(1)
    (True, ('steel', 'brass'), 'brass')
    >>> Factor("Temp", 150, 200, n_levels=3).natural_levels
    (150.0, 175.0, 200.0)
    """

    name: str
    low: float | None = None
    high: float | None = None
    units: str = ""
    levels: tuple = ()
    hard_to_change: bool = False
    n_levels: int | None = None

    def __post_init__(self):
        if not isinstance(self.hard_to_change, (bool, np.bool_)):
            raise LevelwiseError(
                f"The 'hard_to_change' flag of a Factor must be True or False. Got {describe(self.hard_to_change)} "
                "instead."
            )
        object.__setattr__(self, "hard_to_change", bool(self.hard_to_change))
        if not isinstance(self.name, str) or not self.name.strip():
            raise LevelwiseError(
                f"The 'name' of a Factor must be a non-empty string. Got {describe(self.name)} instead."
            )
        if not isinstance(self.units, str):
            raise LevelwiseError(
                f"The 'units' of factor {self.name!r} must be a string. Got {describe(self.units)} instead."
            )
        levels = self.levels
        if levels is None:
            levels = ()
        if isinstance(levels, (str, bytes)) or not hasattr(levels, "__iter__"):
            raise LevelwiseError(
                f"The 'levels' of factor {self.name!r} must be a list of at least 2 distinct levels. "
                f"Got {describe(levels)} instead."
            )
        levels = tuple(levels)
        object.__setattr__(self, "levels", levels)
        if self.n_levels is not None:
            if levels:
                raise LevelwiseError(
                    f"Factor {self.name!r}: 'n_levels' is for continuous factors; a categorical factor has its "
                    f"'levels'. Got n_levels={self.n_levels!r}, levels={describe(levels)}."
                )
            if isinstance(self.n_levels, bool) or not isinstance(self.n_levels, (int, np.integer)) or self.n_levels < 2:
                raise LevelwiseError(
                    f"The 'n_levels' of factor {self.name!r} must be an integer >= 2 or None. "
                    f"Got {describe(self.n_levels)} instead."
                )
            object.__setattr__(self, "n_levels", int(self.n_levels))
        if levels:
            if self.low is not None or self.high is not None:
                raise LevelwiseError(
                    f"Factor {self.name!r}: give either 'low' and 'high' (continuous) or 'levels' (categorical), "
                    f"not both. Got low={self.low!r}, high={self.high!r}, levels={describe(levels)}."
                )
            if len(levels) < 2 or len(set(levels)) != len(levels):
                raise LevelwiseError(
                    f"The 'levels' of factor {self.name!r} must be at least 2 distinct levels. "
                    f"Got {describe(levels)} instead."
                )
            return
        if self.low is None or self.high is None:
            raise LevelwiseError(
                f"Factor {self.name!r} needs 'low' and 'high' (continuous) or 'levels' (categorical). "
                f"Got low={self.low!r}, high={self.high!r}, no levels."
            )
        for field in ("low", "high"):
            value = getattr(self, field)
            if isinstance(value, bool) or not isinstance(value, (int, float, np.integer, np.floating)):
                raise LevelwiseError(
                    f"The '{field}' of factor {self.name!r} must be a finite number. "
                    f"Got {describe(value)} instead."
                )
            try:
                number = float(value)
            except OverflowError:  # an int beyond the float range
                number = math.inf
            if not math.isfinite(number):
                raise LevelwiseError(
                    f"The '{field}' of factor {self.name!r} must be a finite number. Got {value!r} instead."
                )
            object.__setattr__(self, field, float(value))
        if not self.low < self.high:
            raise LevelwiseError(
                f"Factor {self.name!r}: 'low' must be less than 'high'. "
                f"Got low={self.low!r}, high={self.high!r} instead."
            )
        if not (0.0 < (self.high - self.low) / 2.0 < math.inf and math.isfinite((self.low + self.high) / 2.0)):
            raise LevelwiseError(
                f"Factor {self.name!r}: the range from 'low' to 'high' must be a positive finite width (coded units "
                f"divide by it). Got low={self.low!r}, high={self.high!r} instead."
            )

    @property
    def is_categorical(self) -> bool:
        """True for a factor defined by ``levels``."""
        return bool(self.levels)

    @property
    def level_count(self):
        """Number of settings a general design gives the factor: ``len(levels)``, ``n_levels``, else None."""
        return len(self.levels) if self.levels else self.n_levels

    @property
    def coded_levels(self):
        """The coded settings -1 .. +1, equally spaced (categorical: level positions); None when not set."""
        count = self.level_count
        return None if count is None else tuple((2 * i - (count - 1)) / (count - 1) for i in range(count))

    @property
    def natural_levels(self):
        """The levels (categorical) or the ``n_levels`` equally spaced natural settings; None when not set."""
        if self.levels:
            return self.levels
        coded = self.coded_levels
        return None if coded is None else tuple(float(v) for v in self.to_natural(np.array(coded)))

    def _require_continuous(self, what: str):
        if self.levels:
            raise LevelwiseError(
                f"Factor {self.name!r} is categorical (levels {list(self.levels)!r}); {what} needs a "
                "continuous factor with 'low' and 'high'."
            )

    @property
    def center(self) -> float:
        """Natural value at coded 0 (continuous factors only)."""
        self._require_continuous("a centre value")
        return (self.low + self.high) / 2.0

    @property
    def half_range(self) -> float:
        """Natural distance from the centre to coded +1 (continuous factors only)."""
        self._require_continuous("a half range")
        return (self.high - self.low) / 2.0

    @property
    def label(self) -> str:
        """The name with units, e.g. ``"Oven (°C)"``."""
        return f"{self.name} ({self.units})" if self.units else self.name

    def to_coded(self, natural):
        """Convert natural units to coded units (-1 at ``low``, +1 at ``high``).

        For a categorical factor level i of L maps to its position -1 + 2i/(L-1) (two levels: -1 and +1).
        """
        if self.levels:
            lookup = dict(zip(self.levels, self.coded_levels))
            values = np.atleast_1d(np.asarray(natural, dtype=object))
            try:
                out = np.array([lookup[v] for v in values], dtype=float)
            except (KeyError, TypeError):
                bad = next(v for v in values if v not in lookup)
                raise LevelwiseError(
                    f"Factor {self.name!r} has levels {list(self.levels)!r}. Got {describe(bad)} instead."
                ) from None
            return float(out[0]) if np.ndim(natural) == 0 else out
        result = (np.asarray(natural, dtype=float) - self.center) / self.half_range
        return float(result) if np.ndim(result) == 0 else result

    def to_natural(self, coded):
        """Convert coded units back to natural units (level labels for a categorical factor)."""
        if self.levels:
            values = np.atleast_1d(np.asarray(coded, dtype=float))
            position = (values + 1.0) * (len(self.levels) - 1) / 2.0
            index = np.rint(position)
            if not np.all(np.abs(position - index) < 1e-9) or np.any(index < 0) or np.any(index >= len(self.levels)):
                raise LevelwiseError(
                    f"Categorical factor {self.name!r} can only be set to the coded level positions "
                    f"{list(self.coded_levels)} (levels {list(self.levels)!r}). Got {describe(values.tolist())}."
                )
            out = np.array([self.levels[int(i)] for i in index], dtype=object)
            return out[0] if np.ndim(coded) == 0 else out
        result = np.asarray(coded, dtype=float) * self.half_range + self.center
        return float(result) if np.ndim(result) == 0 else result


def default_names(k: int) -> list[str]:
    """Names for *k* factors: A, B, C, ... skipping I, then A1, B1, ... past Z."""
    names = []
    for i in range(k):
        letter = _LETTERS[i % len(_LETTERS)]
        suffix = "" if i < len(_LETTERS) else str(i // len(_LETTERS))
        names.append(letter + suffix)
    return names


def as_factors(factors, parameter: str = "factors") -> tuple[Factor, ...]:
    """Validate *factors* (a sequence of :class:`Factor`, or an int k) into a tuple.

    An integer k gives k coded factors named A, B, C, ... (skipping I) from -1 to +1.
    """
    if isinstance(factors, (int, np.integer)) and not isinstance(factors, bool):
        if factors < 1:
            raise LevelwiseError(f"The '{parameter}' count must be at least 1. Got {factors} instead.")
        return tuple(Factor(name, -1.0, 1.0) for name in default_names(int(factors)))
    if isinstance(factors, Factor):
        factors = [factors]
    try:
        items = tuple(factors)
    except TypeError:
        raise LevelwiseError(
            f"The '{parameter}' parameter must be a list of Factor or an integer. "
            f"Got {describe(factors)} instead."
        ) from None
    if not items:
        raise LevelwiseError(f"The '{parameter}' parameter must name at least one factor. Got none.")
    seen = set()
    for position, item in enumerate(items):
        if not isinstance(item, Factor):
            raise LevelwiseError(
                f"Item {position} of '{parameter}' must be a Factor. Got {describe(item)} instead."
            )
        if item.name in seen:
            raise LevelwiseError(
                f"Factor names must be unique. The name {item.name!r} appears more than once in '{parameter}'."
            )
        seen.add(item.name)
    return items
