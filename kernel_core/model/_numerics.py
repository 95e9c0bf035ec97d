"""Numerics of the least-squares fit: pivoted QR on unit-length columns, rank and aliases, and the
extended-precision re-solve for small or ill-conditioned problems."""

from __future__ import annotations

import numpy as np
import scipy.linalg
import scipy.linalg.lapack


def _scaled_pivoted_qr(X):
    """Householder QR with column pivoting of *X* with its columns scaled to unit length.

    Returns ``(reflectors, r, piv, norms, rank)``: Q stays in LAPACK's factored form (the Householder
    vectors and their factors, ``(qr, tau)``), since the fit needs only ``Q'y`` (:func:`_apply_qt`);
    forming Q explicitly would cost about as much again as the factorisation.
    """
    norms = np.sqrt(np.einsum("ij,ij->j", X, X))
    norms[norms == 0] = 1.0
    scaled = np.asfortranarray(X / norms)
    reflectors, r, piv = scipy.linalg.qr(scaled, mode="raw", pivoting=True, overwrite_a=True, check_finite=False)
    diag = np.abs(np.diag(r))
    n, p = X.shape
    tol = max(n, p) * np.finfo(float).eps * (diag[0] if diag.size else 0.0)
    rank = int((diag > tol).sum())
    return reflectors, r, piv, norms, rank


#: Workspace of LAPACK's ``dormqr`` for one right-hand side: the block size (at most 64) plus its
#: 65 x 64 triangular factor. A smaller workspace would only make ``dormqr`` use smaller blocks.
_ORMQR_WORK = 64 + 65 * 64


def _apply_qt(reflectors, y):
    """``Q'y`` (its first ``min(n, p)`` entries) from the factored Q of :func:`_scaled_pivoted_qr`."""
    qr, tau = reflectors
    k = tau.shape[0]
    if k == 0:
        return np.zeros(0)
    column = np.array(y, dtype=float, order="F").reshape(-1, 1)
    qty, _, info = scipy.linalg.lapack.dormqr("L", "T", qr[:, :k], tau, column, _ORMQR_WORK, overwrite_c=1)
    if info != 0:
        raise ValueError(f"LAPACK dormqr failed (info = {info})")
    return qty[:k, 0]


def _inestimable(X, terms, rank):
    """Pick the inestimable columns in model order and say what each equals.

    Columns are taken greedily in model order: a column that adds nothing to the span of the
    columns kept before it (unit-length columns, residual norm after projection below a tolerance)
    is inestimable, so the later term of each dependency is the one named.
    Returns (kept column indices, {term: "+1*A^2 ..."}).
    """
    norms = np.linalg.norm(X, axis=0)
    norms[norms == 0] = 1.0
    Xs = X / norms
    tol = 100 * max(X.shape) * np.finfo(float).eps
    basis = np.empty((X.shape[0], 0))
    kept = []
    for j in range(X.shape[1]):
        v = Xs[:, j].copy()
        for _ in range(2):  # twice is enough (Gram-Schmidt re-orthogonalisation)
            v -= basis @ (basis.T @ v)
        size = np.linalg.norm(v)
        if size > tol:
            kept.append(j)
            basis = np.column_stack([basis, v / size])
    kept = np.array(kept, dtype=int)
    if len(kept) != rank:  # borderline case: fall back to the pivoted QR's choice
        piv = _scaled_pivoted_qr(X)[2]
        kept = np.sort(piv[:rank])
    dropped = np.setdiff1d(np.arange(X.shape[1]), kept)
    weights, *_ = np.linalg.lstsq(X[:, kept], X[:, dropped], rcond=None)
    aliases = {}
    for j, column in enumerate(dropped):
        w = weights[:, j]
        big = np.flatnonzero(np.abs(w) > 1e-8 * max(1.0, np.abs(w).max(initial=0.0)))
        partners = " ".join(f"{w[i]:+.3g}*{terms[kept[i]]}" for i in big)
        aliases[terms[column]] = partners or "0"
    return kept, aliases


#: Condition number (of the unit-length columns) above which the solution is recomputed in extended precision.
EXTENDED_PRECISION_CONDITION = 1e4
#: Problems with n * p^2 up to this are always solved in extended precision (about a millisecond).
EXTENDED_PRECISION_WORK = 4e6


def _householder_longdouble(A):
    """Householder QR of *A* (n >= p) in extended precision: (R, reflectors)."""
    A = A.copy()
    n, p = A.shape
    reflectors = []
    for k in range(p):
        x = A[k:, k]
        norm = np.sqrt(x @ x)
        v = x.copy()
        v[0] += norm if x[0] >= 0 else -norm
        vv = v @ v
        if vv == 0:
            reflectors.append(None)
            continue
        A[k:, k:] -= np.outer(v, (2 / vv) * (v @ A[k:, k:]))
        reflectors.append((v, vv))
    return np.triu(A[:p, :p]), reflectors


def _back_substitute(R, B):
    out = np.zeros_like(B)
    for i in range(R.shape[0] - 1, -1, -1):
        out[i] = (B[i] - R[i, i + 1 :] @ out[i + 1 :]) / R[i, i]
    return out


def _extended_solution(XL, yL, piv, norms):
    """Least squares in extended precision (numpy longdouble) for ill-conditioned models.

    The model matrix is rebuilt from the settings in extended precision (so the powers of a
    high-degree polynomial are not rounded to float64 first), its columns are scaled and put in the
    pivot order of the float64 QR, and an unpivoted Householder QR is run. Returns float64
    (beta, rinv, fitted, residuals).
    """
    p = XL.shape[1]
    scale = norms[piv].astype(np.longdouble)
    R, reflectors = _householder_longdouble(XL[:, piv] / scale)
    qty = yL.copy()
    for k, reflector in enumerate(reflectors):
        if reflector is not None:
            v, vv = reflector
            qty[k:] -= v * ((2 / vv) * (v @ qty[k:]))
    beta = np.empty(p, dtype=np.longdouble)
    beta[piv] = _back_substitute(R, qty[:p]) / scale
    rinv = np.empty((p, p), dtype=np.longdouble)
    rinv[piv] = _back_substitute(R, np.eye(p, dtype=np.longdouble)) / scale[:, None]
    fitted = XL @ beta
    residuals = yL - fitted
    return (beta.astype(float), rinv.astype(float), fitted.astype(float), residuals.astype(float))

