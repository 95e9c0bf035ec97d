"""Coordinate exchange: the one improvement loop behind every optimal design.

Each new run's coordinates are visited in turn; the candidate values of one coordinate (a grid, the
ends of its feasible interval, the levels of a categorical factor, points along a mixture line) are
scored at once by rank-one updates of ``A = (X'X)^-1`` (Meyer & Nachtsheim 1995): for D the ratio
``det(X1'X1) / det(X'X) = (1 + y A y')(1 - x A x') + (y A x')^2`` of swapping model row x for y;
for I the trace ``tr(A1 W)`` after the two rank-one updates (Sherman–Morrison), with W the moment
matrix of the region. The best improving candidate is taken; the passes stop when none improves.

The callers (:mod:`._optimal`, :mod:`._categorical_design`, :mod:`._mixture_optimal`) differ only
in where candidates come from and how model rows are built: they pass a ``candidates`` function.
"""

from __future__ import annotations

import math

import numpy as np

#: Passes over every coordinate of every new run before a start gives up improving.
MAX_PASSES = 40


def exchange_gain(A, W, phi, x, Y, criterion):
    """Best candidate row of *Y* to replace model row *x*: ``(index, accept)``."""
    Ax = A @ x
    xAx = x @ Ax
    AY = Y @ A
    yAy = np.einsum("ij,ij->i", AY, Y)
    yAx = AY @ x
    if criterion == "D":
        gain = (1 + yAy) * (1 - xAx) + yAx**2
        c = int(np.argmax(gain))
        return c, gain[c] > 1 + 1e-10
    d_y = 1 + yAy
    phi1 = phi - np.einsum("ij,ij->i", AY @ W, AY) / d_y
    A1x = Ax[None, :] - AY * (yAx / d_y)[:, None]
    denom = 1 - (xAx - yAx**2 / d_y)
    with np.errstate(divide="ignore", invalid="ignore"):
        phi2 = np.where(denom > 1e-12, phi1 + np.einsum("ij,ij->i", A1x @ W, A1x) / denom, np.inf)
    c = int(np.argmin(phi2))
    return c, phi2[c] < phi * (1 - 1e-10)


def exchange_runs(points, F, first, candidates, W, criterion, max_passes=MAX_PASSES):
    """Improve rows ``first:`` of *points* (and their model rows *F*) in place; return both.

    Parameters
    ----------
    points : (n, d) array
        The design in the caller's variables; rows before *first* are fixed runs.
    F : (n, p) array
        Model rows of *points*.
    candidates : callable
        ``candidates(i, j, point) -> (trial, Y)`` gives the trial points (c, d) for coordinate j of
        run i and their model rows (c, p), or None when coordinate j cannot move.
    W : (p, p) array or None
        Moment matrix of the region (needed for criterion "I").
    criterion : {"D", "I"}
    """
    p = F.shape[1]
    M = F.T @ F
    # A singular start (a rank-deficient random design) is nudged by a small ridge until it is not.
    ridge = 0.0 if np.linalg.matrix_rank(M) == p else 1e-6 * max(1.0, np.trace(M) / p)
    A = np.linalg.inv(M + ridge * np.eye(p))
    phi = float(np.trace(A @ W)) if criterion == "I" else 0.0
    for _ in range(max_passes):
        changed = False
        for i in range(first, len(points)):
            for j in range(points.shape[1]):
                found = candidates(i, j, points[i])
                if found is None:
                    continue
                trial, Y = found
                c, accept = exchange_gain(A, W, phi, F[i], Y, criterion)
                if not accept:
                    continue
                y = Y[c]
                M += np.outer(y, y) - np.outer(F[i], F[i])
                F[i] = y
                points[i] = trial[c]
                if ridge and np.linalg.matrix_rank(M) == p:
                    ridge = 0.0
                A = np.linalg.inv(M + ridge * np.eye(p))
                phi = float(np.trace(A @ W)) if criterion == "I" else 0.0
                changed = True
        if not changed:
            break
    return points, F


def design_score(F, W, criterion):
    """``(score, log det X'X, average prediction variance)``; smaller scores are better."""
    sign, logdet = np.linalg.slogdet(F.T @ F)
    logdet = logdet if sign > 0 else -math.inf
    apv = float(np.trace(np.linalg.inv(F.T @ F) @ W)) if sign > 0 and W is not None else math.inf
    return (-logdet if criterion == "D" else apv), logdet, apv
