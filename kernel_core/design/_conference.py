"""Conference matrices: C of order n with a zero diagonal, +-1 elsewhere and C C' = (n - 1) I.

Constructions
-------------
* **Paley** (Paley 1933, "On orthogonal matrices", J. Math. Phys. 12, 311-320): for a prime power q, let
  Q[a, b] = chi(a - b) over the elements of GF(q), chi the quadratic character (1 on nonzero squares, -1 on
  non-squares, 0 at 0). Then

  - q = 1 (mod 4): Q is symmetric and C = [[0, 1'], [1, Q]] is a symmetric conference matrix of order q + 1;
  - q = 3 (mod 4): Q is antisymmetric and C = [[0, 1'], [-1, Q]] is an antisymmetric one of order q + 1.

* **Doubling** of an antisymmetric conference matrix S of order n: [[S, S + I], [S - I, -S]] is an
  antisymmetric conference matrix of order 2n (the skew-Hadamard doubling; common practice). It gives order 16
  from order 8, the one order up to 32 with no Paley construction that exists (order 22 does not: 21 is not a
  sum of two squares, Belevitch 1950).

Every shipped order is checked against C C' = (n - 1) I when it is built, and again by the tests.
"""

from __future__ import annotations

from functools import cache

import numpy as np

from .._errors import LevelwiseError

#: Orders built here: Paley for q + 1 with q a prime power, doubling for 16, and the trivial order 2.
SHIPPED_ORDERS = (2, 4, 6, 8, 10, 12, 14, 16, 18, 20, 24, 26, 28, 30, 32)


def _prime_power(q: int):
    """(p, m) with q = p^m, p prime; None otherwise."""
    for p in range(2, q + 1):
        if q % p == 0:
            m, rest = 0, q
            while rest % p == 0:
                rest //= p
                m += 1
            return (p, m) if rest == 1 else None
    return None


def _poly_mod(a, modulus, p):
    """Remainder of polynomial *a* (coefficients, lowest first) by monic *modulus* over GF(p)."""
    a = list(a)
    m = len(modulus) - 1
    while len(a) > m:
        lead = a.pop() % p
        if lead:
            for i in range(m):
                a[len(a) - m + i] = (a[len(a) - m + i] - lead * modulus[i]) % p
    return tuple(x % p for x in a) + (0,) * (m - len(a))


def _irreducible(p: int, m: int):
    """A monic polynomial of degree m (2 or 3) with no root in GF(p): irreducible for those degrees."""
    import itertools

    for tail in itertools.product(range(p), repeat=m):
        coeffs = tuple(tail) + (1,)
        if all(sum(c * pow(x, i, p) for i, c in enumerate(coeffs)) % p for x in range(p)):
            return coeffs
    raise LevelwiseError(f"No irreducible polynomial of degree {m} over GF({p}) found.")  # pragma: no cover


def _field(q: int):
    """Elements of GF(q) as tuples and the subtraction / squaring needed for the quadratic character."""
    p, m = _prime_power(q)
    import itertools

    elements = [tuple(v) for v in itertools.product(range(p), repeat=m)]
    if m == 1:
        def multiply(a, b):
            return ((a[0] * b[0]) % p,)
    else:
        if m > 3:
            raise LevelwiseError(f"GF({q}) needs an irreducible polynomial of degree {m}; only 2 and 3 are built.")
        modulus = _irreducible(p, m)

        def multiply(a, b):
            prod = [0] * (2 * m - 1)
            for i, x in enumerate(a):
                for j, y in enumerate(b):
                    prod[i + j] = (prod[i + j] + x * y) % p
            return _poly_mod(prod, modulus, p)

    def subtract(a, b):
        return tuple((x - y) % p for x, y in zip(a, b))

    return elements, multiply, subtract


def paley(q: int) -> np.ndarray:
    """Paley conference matrix of order q + 1 for a prime power q (see the module docstring)."""
    if _prime_power(q) is None or q % 2 == 0:
        raise LevelwiseError(f"Paley's construction needs an odd prime power q. Got q={q}.")
    elements, multiply, subtract = _field(q)
    zero = elements[0]
    squares = {multiply(a, a) for a in elements if a != zero}
    chi = {a: (0 if a == zero else (1 if a in squares else -1)) for a in elements}
    Q = np.array([[chi[subtract(a, b)] for b in elements] for a in elements], dtype=float)
    sign = 1.0 if q % 4 == 1 else -1.0
    C = np.zeros((q + 1, q + 1))
    C[0, 1:] = 1.0
    C[1:, 0] = sign
    C[1:, 1:] = Q
    return C


def _double(S: np.ndarray) -> np.ndarray:
    eye = np.eye(len(S))
    return np.block([[S, S + eye], [S - eye, -S]])


def is_conference(C: np.ndarray) -> bool:
    """True when C is square, zero on the diagonal, +-1 off it, and C C' = (n - 1) I exactly."""
    C = np.asarray(C, dtype=float)
    n = len(C)
    if C.shape != (n, n):
        return False
    off = ~np.eye(n, dtype=bool)
    return bool(np.all(np.diag(C) == 0) and np.all(np.abs(C[off]) == 1)
                and np.array_equal(C @ C.T, (n - 1) * np.eye(n)))


@cache
def _build(n: int) -> np.ndarray:
    if n == 2:
        C = np.array([[0.0, 1.0], [1.0, 0.0]])
    elif n == 16:
        C = _double(_build(8))
    else:
        C = paley(n - 1)
    if not is_conference(C):  # pragma: no cover - every shipped order passes (tests/test_definitive_screening.py)
        raise LevelwiseError(f"The conference matrix of order {n} failed C C' = (n - 1) I.")
    C.setflags(write=False)
    return C


def conference_matrix(n: int) -> np.ndarray:
    """Conference matrix of order *n* (one of :data:`SHIPPED_ORDERS`); a new array each call.

    Examples
    --------
    >>> C = conference_matrix(6)
    >>> bool((C @ C.T == 5 * np.eye(6)).all())
    True
    """
    if n not in SHIPPED_ORDERS:
        raise LevelwiseError(
            f"No conference matrix of order {n} is built here; available orders: {list(SHIPPED_ORDERS)}."
        )
    return _build(int(n)).copy()


__all__ = ["SHIPPED_ORDERS", "conference_matrix", "is_conference", "paley"]
