"""Wigner 3j and 6j symbols, exact.

Both follow Racah's closed sums (A. R. Edmonds, *Angular Momentum in
Quantum Mechanics*, Princeton 1957, eqs. 3.7.3 and 6.3.7). Every symbol is
``sign * sqrt(Q)`` with ``Q`` rational, so the squares that rates need are
returned exactly as :class:`fractions.Fraction` and the signed values are
correctly rounded floats. Arguments may be integers, half-integers given as
floats (``1.5``) or fractions; internally everything is doubled to integers
so that no rounding enters the selection rules.
"""

import math
from fractions import Fraction
from functools import lru_cache


def twice(j) -> int:
    """``2 j`` as an integer; ``ValueError`` unless ``j`` is a whole or half-integer."""
    d = 2 * Fraction(j)  # exact for binary floats such as 1.5
    if d.denominator != 1:
        raise ValueError(f"not a whole or half-integer: {j!r}")
    return int(d)


def _fact(two_n: int) -> int:
    """``n!`` for ``n = two_n / 2`` (``two_n`` even and >= 0)."""
    return math.factorial(two_n // 2)


def _triangle(a: int, b: int, c: int) -> bool:
    """Doubled ``a, b, c`` obey the triangle rule with an integer sum."""
    return (a + b + c) % 2 == 0 and abs(a - b) <= c <= a + b


def _delta(a: int, b: int, c: int) -> Fraction:
    """Triangle coefficient ``(a+b-c)! (a-b+c)! (-a+b+c)! / (a+b+c+1)!`` (doubled args)."""
    return Fraction(_fact(a + b - c) * _fact(a - b + c) * _fact(-a + b + c),
                    _fact(a + b + c + 2))


def _signed(s: Fraction, q: Fraction, phase: int) -> tuple:
    """``(sign, square)`` of ``(-1)^phase * s * sqrt(q)``."""
    if s == 0 or q == 0:
        return 0, Fraction(0)
    sign = (1 if s > 0 else -1) * (-1 if phase % 2 else 1)
    return sign, s * s * q


@lru_cache(maxsize=None)
def _three_j(j1, j2, j3, m1, m2, m3) -> tuple:
    if m1 + m2 + m3 != 0 or not _triangle(j1, j2, j3):
        return 0, Fraction(0)
    for j, m in ((j1, m1), (j2, m2), (j3, m3)):
        if abs(m) > j or (j + m) % 2:
            return 0, Fraction(0)
    q = _delta(j1, j2, j3)
    for j, m in ((j1, m1), (j2, m2), (j3, m3)):
        q *= _fact(j + m) * _fact(j - m)
    lo = max(0, j2 - j3 - m1, j1 - j3 + m2)
    hi = min(j1 + j2 - j3, j1 - m1, j2 + m2)
    s = Fraction(0)
    for k in range(lo, hi + 1, 2):
        den = (_fact(k) * _fact(j3 - j2 + k + m1) * _fact(j3 - j1 + k - m2)
               * _fact(j1 + j2 - j3 - k) * _fact(j1 - k - m1) * _fact(j2 - k + m2))
        s += Fraction(-1 if (k // 2) % 2 else 1, den)
    return _signed(s, q, (j1 - j2 - m3) // 2)


@lru_cache(maxsize=None)
def _six_j(j1, j2, j3, j4, j5, j6) -> tuple:
    triads = ((j1, j2, j3), (j1, j5, j6), (j4, j2, j6), (j4, j5, j3))
    if not all(_triangle(*t) for t in triads):
        return 0, Fraction(0)
    q = Fraction(1)
    for t in triads:
        q *= _delta(*t)
    a = [sum(t) for t in triads]
    b = (j1 + j2 + j4 + j5, j2 + j3 + j5 + j6, j3 + j1 + j6 + j4)
    s = Fraction(0)
    for t in range(max(a), min(b) + 1, 2):
        den = 1
        for x in a:
            den *= _fact(t - x)
        for x in b:
            den *= _fact(x - t)
        s += Fraction((-1 if (t // 2) % 2 else 1) * _fact(t + 2), den)
    return _signed(s, q, 0)


def wigner_3j_squared(j1, j2, j3, m1, m2, m3) -> Fraction:
    """Exact square of the 3j symbol ``(j1 j2 j3; m1 m2 m3)``."""
    return _three_j(*map(twice, (j1, j2, j3, m1, m2, m3)))[1]


def wigner_3j(j1, j2, j3, m1, m2, m3) -> float:
    """The 3j symbol ``(j1 j2 j3; m1 m2 m3)`` (Condon-Shortley phases)."""
    sign, sq = _three_j(*map(twice, (j1, j2, j3, m1, m2, m3)))
    return sign * math.sqrt(sq)


def wigner_6j_squared(j1, j2, j3, j4, j5, j6) -> Fraction:
    """Exact square of the 6j symbol ``{j1 j2 j3; j4 j5 j6}``."""
    return _six_j(*map(twice, (j1, j2, j3, j4, j5, j6)))[1]


def wigner_6j(j1, j2, j3, j4, j5, j6) -> float:
    """The 6j symbol ``{j1 j2 j3; j4 j5 j6}``."""
    sign, sq = _six_j(*map(twice, (j1, j2, j3, j4, j5, j6)))
    return sign * math.sqrt(sq)
