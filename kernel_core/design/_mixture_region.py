"""Mixture components and the region of blends they allow.

A mixture's components are proportions of a whole: every blend sums to the *total* (1 by default, 100 for
percentages). Lower and upper bounds (and optional linear constraints) cut the simplex down to a convex
polytope of dimension q - 1. This module checks that the region is not empty, tightens each bound to the one the
others imply, enumerates the region's vertices and faces, and maps blends to L-pseudo-components
(McLean & Anderson 1966, "Extreme vertices design of mixture experiments", *Technometrics* 8, 447-454):
``z_i = (x_i - L_i) / (T - sum L)``.
"""

from __future__ import annotations

import itertools
import math
from dataclasses import dataclass

import numpy as np
import pandas as pd

from .._errors import LevelwiseError, describe
from .._numbers import float_values
from ._factors import Factor, default_names

#: Largest number of components (vertex enumeration is exponential in q).
MAX_COMPONENTS = 16
#: Largest number of active-set combinations tried when linear constraints are given.
MAX_COMBINATIONS = 200_000


def _finite(value, field, name):
    if isinstance(value, bool) or not isinstance(value, (int, float, np.integer, np.floating)):
        raise LevelwiseError(f"The '{field}' of component {name!r} must be a finite number. Got {describe(value)}.")
    value = float(value)
    if not math.isfinite(value):
        raise LevelwiseError(f"The '{field}' of component {name!r} must be a finite number. Got {value!r}.")
    return value


@dataclass(frozen=True)
class Component:
    """One ingredient of a mixture, given as an amount of the mixture total.

    Parameters
    ----------
    name : str
        Non-empty, unique within the mixture.
    low : float, default 0
        Smallest amount allowed (in the units of the total: a proportion when the total is 1).
    high : float, optional
        Largest amount allowed; the default (None) is the mixture total, i.e. no upper bound.
    units : str, optional
        Shown beside the name, e.g. ``"%"``.

    Examples
    --------
    >>> Component("resin", 0.2, 0.6)
    Component(name='resin', low=0.2, high=0.6, units='')
    """

    name: str
    low: float = 0.0
    high: float | None = None
    units: str = ""

    def __post_init__(self):
        if not isinstance(self.name, str) or not self.name.strip():
            raise LevelwiseError(f"The 'name' of a Component must be a non-empty string. Got {describe(self.name)}.")
        if not isinstance(self.units, str):
            raise LevelwiseError(f"The 'units' of component {self.name!r} must be a string. "
                                 f"Got {describe(self.units)}.")
        low = _finite(self.low, "low", self.name)
        if low < 0:
            raise LevelwiseError(f"The 'low' of component {self.name!r} must be >= 0 (an amount). Got {low!r}.")
        object.__setattr__(self, "low", low)
        if self.high is not None:
            high = _finite(self.high, "high", self.name)
            if not high > low:
                raise LevelwiseError(
                    f"Component {self.name!r}: 'high' must be greater than 'low'. Got low={low!r}, high={high!r}."
                )
            object.__setattr__(self, "high", high)

    @property
    def label(self) -> str:
        return f"{self.name} ({self.units})" if self.units else self.name


def as_components(components, parameter="components") -> tuple:
    """A tuple of Component from a sequence of Component (or names), or an int q (components A, B, C, ...)."""
    if isinstance(components, (int, np.integer)) and not isinstance(components, bool):
        if components < 2:
            raise LevelwiseError(f"A mixture needs at least 2 components. Got '{parameter}'={components}.")
        return tuple(Component(n) for n in default_names(int(components)))
    if isinstance(components, (Component, str)):
        components = [components]
    try:
        items = tuple(Component(c) if isinstance(c, str) else c for c in components)
    except TypeError:
        raise LevelwiseError(
            f"The '{parameter}' parameter must be a list of Component or an integer. Got {describe(components)}."
        ) from None
    for position, item in enumerate(items):
        if not isinstance(item, Component):
            raise LevelwiseError(f"Item {position} of '{parameter}' must be a Component. Got {describe(item)}.")
    names = [c.name for c in items]
    dup = sorted({n for n in names if names.count(n) > 1})
    if dup:
        raise LevelwiseError(f"Component names must be unique. {dup} appear more than once in '{parameter}'.")
    if len(items) < 2:
        raise LevelwiseError(f"A mixture needs at least 2 components. Got {len(items)} in '{parameter}'.")
    if len(items) > MAX_COMPONENTS:
        raise LevelwiseError(f"A mixture is limited to {MAX_COMPONENTS} components here. Got {len(items)}.")
    return items


def _fmt(value) -> str:
    return f"{value:.10g}"


class Mixture:
    """The region of blends allowed by the components' bounds, the total and optional linear constraints.

    Parameters
    ----------
    components : list of Component or int
    total : float, default 1
        What every blend sums to (1 for proportions, 100 for percent, a batch mass, ...).
    constraints : str or list of str, optional
        Linear inequalities over the component amounts, e.g. ``"A + 2*B <= 0.7"``.

    Raises
    ------
    LevelwiseError
        An empty region (the lower bounds sum to more than the total, the upper bounds to less, or constraints
        no blend meets), a region of a single blend, or bad components.

    Examples
    --------
    >>> m = Mixture([Component("A", 0.1), Component("B", 0.2), Component("C", 0.3)])
    >>> m.lows.tolist(), m.highs.tolist()
    ([0.1, 0.2, 0.3], [0.5, 0.6, 0.7])
    >>> m.to_pseudo([[0.1, 0.2, 0.7]]).round(12).tolist()
    [[0.0, 0.0, 1.0]]
    """

    def __init__(self, components, total: float = 1.0, constraints=None):
        if isinstance(components, Mixture):
            components = components.components
        self.components = as_components(components)
        if isinstance(total, bool) or not isinstance(total, (int, float, np.integer, np.floating)) \
                or not math.isfinite(float(total)) or total <= 0:
            raise LevelwiseError(f"The mixture 'total' must be a positive finite number. Got {describe(total)}.")
        self.total = T = float(total)
        names = self.names
        low = np.array([c.low for c in self.components])
        high = np.array([T if c.high is None else min(c.high, T) for c in self.components])
        too_low = [c.name for c in self.components if c.low >= T]
        if too_low:
            raise LevelwiseError(
                f"Component(s) {too_low} have a lower bound at or above the mixture total {_fmt(T)}; "
                "no blend could hold any other component."
            )
        tol = 1e-12 * T
        if low.sum() > T + tol:
            raise LevelwiseError(
                f"The bounds are infeasible: the lower bounds of {names} sum to {_fmt(low.sum())}, more than the "
                f"mixture total {_fmt(T)}. Lower some lower bounds."
            )
        if low.sum() > T - tol:
            raise LevelwiseError(
                f"The lower bounds of {names} sum to exactly the mixture total {_fmt(T)}: only one blend is "
                "possible, so there is nothing to vary. Lower some lower bounds."
            )
        if high.sum() < T - tol:
            raise LevelwiseError(
                f"The bounds are infeasible: the upper bounds of {names} sum to {_fmt(high.sum())}, less than the "
                f"mixture total {_fmt(T)}, so no blend reaches the total. Raise some upper bounds."
            )
        if high.sum() < T + tol:
            raise LevelwiseError(
                f"The upper bounds of {names} sum to exactly the mixture total {_fmt(T)}: only one blend is "
                "possible, so there is nothing to vary. Raise some upper bounds."
            )
        # Bounds implied by the others (a component cannot exceed T - sum of the other lows, ...).
        self.declared_lows, self.declared_highs = low, high
        others = ~np.eye(len(low), dtype=bool)  # sums over the other components, added directly (no cancellation)
        self.lows = np.maximum(low, T - np.array([high[o].sum() for o in others]))
        self.highs = np.minimum(high, T - np.array([low[o].sum() for o in others]))
        self.constraint_text = [constraints] if isinstance(constraints, str) else list(constraints or [])
        from ._constraints import parse_constraint

        rows = [parse_constraint(text, names) for text in self.constraint_text]
        self.G = np.array([a for a, _ in rows], dtype=float).reshape(len(rows), self.q)
        self.h = np.array([b for _, b in rows], dtype=float)
        if len(rows):
            self._check_constraints()

    # -- basic facts ---------------------------------------------------------------------------------------------
    @property
    def names(self) -> list:
        return [c.name for c in self.components]

    @property
    def q(self) -> int:
        return len(self.components)

    @property
    def pseudo_range(self) -> float:
        """T - sum of the lower bounds: the size of the L-pseudo-component simplex."""
        return self.total - float(self.lows.sum())

    @property
    def is_simplex(self) -> bool:
        """True when the region is the whole simplex of the L-pseudo-components (no upper bound or
        constraint cuts it), so simplex designs apply in pseudo-components."""
        return not len(self.G) and bool(np.all(self.highs >= self.lows + self.pseudo_range * (1 - 1e-12)))

    def factors(self) -> list:
        """One :class:`Factor` per component, its range the implied bounds (what a Design table holds)."""
        return [Factor(c.name, float(lo), float(hi), c.units) for c, lo, hi in zip(self.components, self.lows,
                                                                                    self.highs)]

    def __repr__(self) -> str:
        bounds = ", ".join(f"{n} {_fmt(lo)}..{_fmt(hi)}" for n, lo, hi in zip(self.names, self.lows, self.highs))
        extra = f"; constraints {self.constraint_text}" if self.constraint_text else ""
        return f"<Mixture total {_fmt(self.total)}: {bounds}{extra}>"

    # -- coordinates ---------------------------------------------------------------------------------------------
    def to_pseudo(self, amounts) -> np.ndarray:
        """L-pseudo-components (summing to 1) of blends given as amounts, shape (n, q)."""
        x = np.atleast_2d(np.asarray(amounts, dtype=float))
        return (x - self.lows) / self.pseudo_range

    def from_pseudo(self, pseudo) -> np.ndarray:
        """Amounts of blends given in L-pseudo-components."""
        z = np.atleast_2d(np.asarray(pseudo, dtype=float))
        return self.lows + z * self.pseudo_range

    def to_proportions(self, amounts) -> np.ndarray:
        return np.atleast_2d(np.asarray(amounts, dtype=float)) / self.total

    # -- checks --------------------------------------------------------------------------------------------------
    def _check_constraints(self):
        from scipy.optimize import linprog

        # Largest slack t with G x + t |g| <= h, L <= x <= U, sum x = T: t > 0 means the region has an interior.
        norms = np.linalg.norm(self.G, axis=1)
        c = np.zeros(self.q + 1)
        c[-1] = -1.0
        res = linprog(c, A_ub=np.column_stack([self.G, norms]), b_ub=self.h,
                      A_eq=np.append(np.ones(self.q), 0.0)[None, :], b_eq=[self.total],
                      bounds=list(zip(self.lows, self.highs)) + [(None, self.total)], method="highs")
        if res.status != 0 or -res.fun <= 1e-9 * self.total:
            raise LevelwiseError(
                f"The 'constraints' {self.constraint_text} leave no blend (or no blend with room to vary) inside "
                f"the component bounds with the total {_fmt(self.total)}."
            )

    def check_blends(self, amounts, where="blend", rows=None) -> np.ndarray:
        """Raise a LevelwiseError naming the components when a blend does not sum to the total, breaks a bound
        or a constraint. *amounts* is (n, q) in component order; returns it as floats."""
        x = np.atleast_2d(np.asarray(amounts, dtype=float))
        labels = rows if rows is not None else np.arange(1, len(x) + 1)
        tol = 1e-9 * self.total
        bad = ~np.isfinite(x)
        if bad.any():
            i, j = np.argwhere(bad)[0]
            raise LevelwiseError(f"The {where} in row {labels[i]} has no finite amount for component "
                                 f"{self.names[j]!r}. Got {x[i, j]!r}.")
        sums = x.sum(axis=1)
        off = np.flatnonzero(np.abs(sums - self.total) > tol)
        if len(off):
            i = off[0]
            parts = " + ".join(f"{n} {_fmt(v)}" for n, v in zip(self.names, x[i]))
            raise LevelwiseError(
                f"The {where} in row {labels[i]} does not sum to the mixture total {_fmt(self.total)}: "
                f"{parts} = {_fmt(sums[i])}. The components {self.names} must sum to the total."
            )
        below = x < self.declared_lows - tol
        above = x > self.declared_highs + tol
        if below.any() or above.any():
            i = int(np.flatnonzero(below.any(axis=1) | above.any(axis=1))[0])
            broken = [f"{self.names[j]} = {_fmt(x[i, j])} (allowed {_fmt(self.declared_lows[j])}.."
                      f"{_fmt(self.declared_highs[j])})" for j in range(self.q) if below[i, j] or above[i, j]]
            raise LevelwiseError(f"The {where} in row {labels[i]} breaks the component bounds: {'; '.join(broken)}.")
        if len(self.G):
            viol = x @ self.G.T > self.h + 1e-9 * np.maximum(1.0, np.abs(self.h))
            if viol.any():
                i, c = np.argwhere(viol)[0]
                raise LevelwiseError(f"The {where} in row {labels[i]} breaks the constraint "
                                     f"{self.constraint_text[c]!r} (components {self.names}).")
        return x

    def amounts_from(self, settings, where="settings") -> np.ndarray:
        """The (n, q) component amounts of a dict or DataFrame of settings, checked by :meth:`check_blends`."""
        if isinstance(settings, dict):
            columns = {k: np.atleast_1d(np.asarray(v, dtype=object)) for k, v in settings.items()}
            n = max((len(v) for v in columns.values()), default=1)
            settings = pd.DataFrame({k: np.resize(v, n) for k, v in columns.items()})
        if not isinstance(settings, pd.DataFrame):
            raise LevelwiseError(f"The '{where}' must be a dict or DataFrame of component amounts. "
                                 f"Got {describe(settings)}.")
        missing = [n for n in self.names if n not in settings.columns]
        if missing:
            raise LevelwiseError(f"The '{where}' are missing component(s) {missing}; a blend gives every component "
                                 f"of the mixture {self.names}.")
        x = np.column_stack([float_values(settings[n]) for n in self.names])
        return self.check_blends(x, where, rows=np.arange(1, len(x) + 1))

    # -- geometry ------------------------------------------------------------------------------------------------
    def _inequalities(self):
        """All inequalities A x <= b of the region (lower bounds, upper bounds, constraints)."""
        eye = np.eye(self.q)
        A = np.vstack([-eye, eye, self.G])
        b = np.concatenate([-self.lows, self.highs, self.h])
        return A, b

    def vertices(self) -> np.ndarray:
        """Every vertex of the region as amounts, (v, q), sorted.

        Bounds only: the algorithm of McLean & Anderson (1966): put q - 1 components at a lower or upper bound,
        the last takes the rest of the total, and keep the blends inside its bounds. With linear constraints:
        every choice of q - 1 inequalities made active with the total, solved and kept when feasible.
        """
        cache = self.__dict__.get("_vertices")
        if cache is not None:
            return cache.copy()
        q, T = self.q, self.total
        if not len(self.G):
            found = []
            bounds = np.column_stack([self.lows, self.highs])
            for free in range(q):
                others = [j for j in range(q) if j != free]
                choice = np.array(list(itertools.product((0, 1), repeat=q - 1)))
                vals = bounds[others][np.arange(q - 1)[None, :], choice]
                rest = T - vals.sum(axis=1)
                ok = (rest >= self.lows[free] - 1e-12 * T) & (rest <= self.highs[free] + 1e-12 * T)
                pts = np.zeros((ok.sum(), q))
                pts[:, others] = vals[ok]
                pts[:, free] = rest[ok]
                found.append(pts)
            points = np.vstack(found)
        else:
            A, b = self._inequalities()
            m = len(A)
            count = math.comb(m, q - 1)
            if count > MAX_COMBINATIONS:
                raise LevelwiseError(f"The region has too many inequalities ({m}) for {q} components to enumerate "
                                     f"its vertices ({count} combinations; limit {MAX_COMBINATIONS}).")
            combos = np.array(list(itertools.combinations(range(m), q - 1)), dtype=int).reshape(-1, q - 1)
            M = np.concatenate([A[combos], np.ones((len(combos), 1, q))], axis=1)
            rhs = np.concatenate([b[combos], np.full((len(combos), 1), T)], axis=1)
            det_ok = np.abs(np.linalg.det(M)) > 1e-10
            sol = np.linalg.solve(M[det_ok], rhs[det_ok][..., None])[..., 0]
            feasible = np.all(sol @ A.T <= b + 1e-9 * max(1.0, T), axis=1)
            points = sol[feasible]
        points = np.where(np.abs(points) < 1e-13 * T, 0.0, points)
        rounded = np.round(points / T, 10)
        _, first = np.unique(rounded, axis=0, return_index=True)
        points = points[np.sort(first)]
        points = points[np.lexsort(points.T[::-1])]
        self.__dict__["_vertices"] = points
        return points.copy()

    def faces(self, dimension: int) -> list:
        """The faces of the region of one *dimension* (1 = edges, ..., q - 2 = facets), each as an array of the
        indices (into :meth:`vertices`) of its vertices."""
        q = self.q
        if isinstance(dimension, bool) or not isinstance(dimension, (int, np.integer)) \
                or not 1 <= dimension <= q - 2:
            raise LevelwiseError(f"A face dimension must be an integer from 1 to {q - 2} for {q} components. "
                                 f"Got {describe(dimension)}.")
        V = self.vertices()
        A, b = self._inequalities()
        scale = max(1.0, self.total)
        tight = np.abs(V @ A.T - b) <= 1e-9 * scale  # (v, m)
        faces, seen = [], set()
        for S in itertools.combinations(range(len(A)), q - 1 - int(dimension)):
            members = np.flatnonzero(tight[:, list(S)].all(axis=1))
            if len(members) < dimension + 1:
                continue
            key = tuple(members)
            if key in seen:
                continue
            diffs = V[members] - V[members[0]]
            if np.linalg.matrix_rank(diffs, tol=1e-9 * scale) == dimension:
                seen.add(key)
                faces.append(members)
        return faces

    def centroid(self) -> np.ndarray:
        """The overall centroid: the average of the vertices (McLean & Anderson 1966)."""
        return self.vertices().mean(axis=0)

    def sample(self, count: int, rng) -> np.ndarray:
        """*count* blends spread uniformly over the region (amounts): uniform on the pseudo-component simplex,
        rejecting blends outside the upper bounds and constraints; convex combinations of the vertices when
        rejection keeps too few."""
        A, b = self._inequalities()
        out, have = [], 0
        for _ in range(50):
            z = rng.dirichlet(np.ones(self.q), size=max(512, 4 * count))
            x = self.from_pseudo(z)
            x = x[np.all(x @ A.T <= b + 1e-12 * self.total, axis=1)]
            out.append(x)
            have += len(x)
            if have >= count:
                return np.vstack(out)[:count]
        V = self.vertices()
        w = rng.dirichlet(np.ones(len(V)), size=count - have)
        return np.vstack(out + [w @ V])[:count]


def as_mixture(components, total=None, constraints=None) -> Mixture:
    """A :class:`Mixture` from a Mixture (total/constraints must then be left out) or components."""
    if isinstance(components, Mixture):
        if (total is not None and float(total) != components.total) or constraints:
            raise LevelwiseError("Give the 'total' and 'constraints' either in the Mixture or as parameters, not "
                                 f"both. Got a Mixture with total {_fmt(components.total)} and total={total!r}, "
                                 f"constraints={constraints!r}.")
        return components
    return Mixture(components, 1.0 if total is None else total, constraints)


__all__ = ["Component", "Mixture", "as_components", "as_mixture"]
