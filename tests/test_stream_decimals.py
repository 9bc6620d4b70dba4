"""Decimals of x = [0; a1, a2, ...]: mpmath evaluation, Fraction convergents, and the certainty rule."""
from __future__ import annotations

import math
from fractions import Fraction

import mpmath
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from cfsweep import stream as S
from test_stream_support import reference_stream


def mp_value(terms: list[int], dps: int):
    """x = [0; terms] evaluated from the back in mpmath at ``dps`` digits."""
    with mpmath.workdps(dps):
        x = mpmath.mpf(0)
        for a in reversed(terms):
            x = 1 / (a + x)
        return x


def mp_digits(x, m: int, dps: int) -> str:
    with mpmath.workdps(dps):
        return str(int(mpmath.floor(x * mpmath.mpf(10) ** m))).zfill(m)


def fraction_convergents(terms: list[int]) -> list[Fraction]:
    """p_n/q_n for n = 0..len(terms), each by direct Fraction evaluation of [0; a1..an]."""
    out = [Fraction(0)]
    for n in range(1, len(terms) + 1):
        x = Fraction(0)
        for a in reversed(terms[:n]):
            x = 1 / (a + x)
        out.append(x)
    return out


def fraction_digits(x: Fraction, m: int) -> str:
    return str(math.floor(x * 10 ** m)).zfill(m)


@pytest.mark.parametrize("family", ["all", "reduced", "prime", "reduced,den=squarefree"])
def test_decimals_agree_with_mpmath(family):
    m = 2000
    result = S.decimal_expansion(family, m)
    terms, _ = reference_stream(family, result.terms + 400)
    x = mp_value(terms, m + 200)
    assert result.digits == mp_digits(x, m, m + 200)
    assert len(result.digits) == m
    # The returned pair is a consecutive pair of convergents of the prefix used.
    p0, q0, p1, q1 = result.convergents
    assert abs(p0 * q1 - p1 * q0) == 1
    head = terms[:result.terms]
    x_n = Fraction(0)
    for t in reversed(head):
        x_n = 1 / (t + x_n)
    assert Fraction(p1, q1) == x_n


def test_digits_are_the_same_without_gmpy2(monkeypatch):
    m = 5000  # above Python's default 4300-digit int-to-str limit
    with_gmpy = S.decimals("all", m)
    monkeypatch.setattr(S, "_gmpy2", None)
    monkeypatch.setattr(S, "_mpz", int)
    assert S.decimals("all", m) == with_gmpy


def test_uncertain_boundary_digits_are_not_printed():
    # x somewhere in (0.12999999, 0.13000001): only the first digit "1" is certain.
    assert S.certain_digits(12999999, 10 ** 8, 13000001, 10 ** 8, 8) == "1"
    assert S.certain_digits(1299, 10 ** 4, 1301, 10 ** 4, 3) == "1"
    # A run of zeros: (0.2000001, 0.2000003) -> 0.200000 certain, the 7th digit is 1 or 2.
    assert S.certain_digits(2000001, 10 ** 7, 2000003, 10 ** 7, 7) == "200000"
    assert S.certain_digits(1, 3, 1, 3, 5) == "33333"
    # (0.49, 0.51): the first digit is 4 or 5, so nothing is certain.
    assert S.certain_digits(49, 100, 51, 100, 2) == ""


@settings(max_examples=60, deadline=None)
@given(a=st.fractions(0, 1), b=st.fractions(0, 1), m=st.integers(1, 40))
def test_certain_digits_hold_for_every_point_between(a, b, m):
    lo, hi = min(a, b), max(a, b)
    if lo == hi or hi == 1:
        return
    text = S.certain_digits(lo.numerator, lo.denominator, hi.numerator, hi.denominator, m)
    k = len(text)
    assert k <= m
    for y in (lo, hi, (lo + hi) / 2, lo + (hi - lo) / 7):
        assert fraction_digits(y, m)[:k] == text
    if k < m:
        # Maximal: the next digit differs at the two ends (so it is not certain).
        assert fraction_digits(lo, m)[k] != fraction_digits(hi, m)[k]


ALL_TERMS, _ = reference_stream("all", 1200)
X_TRUE = mp_value(ALL_TERMS, 1000)  # |x - p_1200/q_1200| < 1/q_1200^2, far below 10^-1000
CONVERGENTS = fraction_convergents(ALL_TERMS[:260])


@settings(max_examples=40, deadline=None)
@given(n=st.integers(1, 259))
def test_digits_from_any_prefix_are_digits_of_x(n):
    m = 300
    lo, hi = sorted((CONVERGENTS[n], CONVERGENTS[n + 1]))
    text = S.certain_digits(lo.numerator, lo.denominator, hi.numerator, hi.denominator, m)
    assert mp_digits(X_TRUE, m, 1000)[:len(text)] == text
    # The convergents really bracket x.
    with mpmath.workdps(1000):
        assert mpmath.mpf(lo.numerator) / lo.denominator < X_TRUE < mpmath.mpf(hi.numerator) / hi.denominator


def test_decimals_bad_input():
    for bad in (0, -3, 1.5, S.MAX_DECIMALS + 1):
        with pytest.raises(S.UsageError, match="decimals"):
            S.decimals("all", bad)
    with pytest.raises(S.UsageError, match="max_digits 0"):
        S.certain_digits(1, 3, 1, 2, 0)
