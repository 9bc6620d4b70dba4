"""The Gauss measure: cylinders, pooled symbols, Gauss–Kuzmin, and the constants of the theory.

This module is the single source of truth for every formula and constant about the Gauss measure
mu(A) = (1/ln 2) * integral_A dx / (1 + x) on [0, 1]. Digits are partial quotients a >= 1.

Words may contain the pooled symbol "D+" (all digits >= D); it is written as any integer >= ``cap``
together with the ``cap`` of the table. Its measure is the exact measure of the union of cylinders.
"""
from __future__ import annotations

import math
from fractions import Fraction
from functools import lru_cache
from typing import Sequence

import mpmath

LN2 = math.log(2.0)

#: Khinchin's constant K0 (OEIS A002210; Khinchin, *Continued Fractions*).
KHINCHIN = 2.68545200106530644530971483548
#: Lévy's constant pi^2 / (12 ln 2) (OEIS A100199): growth rate of ln q_n for almost every x.
LEVY = 1.18656911041562545282
#: exp(pi^2 / (12 ln 2)) (OEIS A086702).
LEVY_EXP = 3.27582291872181115978768
#: 12 ln 2 / pi^2 (OEIS A089729): mean Euclid length of p/q grows like this times ln q
#: (Heilbronn; Knuth TAOCP vol. 2 §4.5.3).
HEILBRONN = 12.0 * LN2 / math.pi ** 2
#: Porter's constant C (OEIS A086237; Porter, Mathematika 22 (1975); Knuth, Comput. Math. Appl. 2
#: (1976)): mean of Knuth's step count over p coprime to q is HEILBRONN ln q + C + o(1).
PORTER = 1.46707807943397547289779848470723
#: Harmonic mean of partial quotients K_{-1} (OEIS A087491).
HARMONIC_MEAN_DIGITS = 1.74540566240734686349459630968


def heilbronn_porter_mean_length(q: int) -> float:
    """Predicted mean expansion length over 1 <= p < q, gcd(p, q) = 1 (q >= 2).

    Heilbronn–Porter: mean Knuth step count = (12 ln 2 / pi^2) ln q + C + O(q^(-1/6+eps)); Knuth's
    count includes one trivial step, so the length of the shorter expansion is one less.
    """
    return HEILBRONN * math.log(q) + PORTER - 1.0


def gauss_kuzmin(a: int) -> float:
    """Gauss–Kuzmin law P(a1 = a) = log2(1 + 1/(a(a+2))) for a digit a >= 1 (Knuth TAOCP 2 §4.5.3)."""
    if a < 1:
        raise ValueError(f"digit {a} out of range: digits are >= 1")
    return math.log1p(1.0 / (a * (a + 2))) / LN2


def gauss_kuzmin_tail(cap: int) -> float:
    """P(a1 >= cap) = log2(1 + 1/cap): the Gauss measure of the pooled symbol "cap+" (cap >= 1)."""
    if cap < 1:
        raise ValueError(f"cap {cap} out of range: cap >= 1")
    return math.log1p(1.0 / cap) / LN2


def convergents(word: Sequence[int]) -> tuple[int, int, int, int]:
    """(p_k, q_k, p_{k-1}, q_{k-1}) of [0; b1, ..., bk] with p_{-1} = 1, q_{-1} = 0, p_0 = 0, q_0 = 1."""
    p_prev, q_prev, p, q = 1, 0, 0, 1
    for b in word:
        p_prev, q_prev, p, q = p, q, b * p + p_prev, b * q + q_prev
    return p, q, p_prev, q_prev


def cylinder_endpoints(word: Sequence[int]) -> tuple[Fraction, Fraction]:
    """The cylinder [b1..bk] as a closed interval (lo, hi): between p_k/q_k and (p_k+p_{k-1})/(q_k+q_{k-1})."""
    p, q, pp, qp = convergents(word)
    a, b = Fraction(p, q), Fraction(p + pp, q + qp)
    return (a, b) if a <= b else (b, a)


def _log2_ratio(num: int, den: int) -> float:
    """log2(num/den) for positive integers, accurate also when num/den is close to 1."""
    return math.log1p(Fraction(num - den, den)) / LN2 if abs(num - den) < den else math.log2(Fraction(num, den))


def cylinder_measure(word: Sequence[int]) -> float:
    """Exact Gauss measure of the cylinder [b1..bk] (all b >= 1), rounded once to float64.

    mu = |log2((1 + p_k/q_k) / (1 + (p_k+p_{k-1})/(q_k+q_{k-1})))|; the ratio is formed in integers so
    that long words (ratios near 1) keep full relative precision.
    """
    if any(b < 1 for b in word):
        raise ValueError(f"word {tuple(word)} has a digit < 1")
    p, q, pp, qp = convergents(word)
    num = (q + p) * (q + qp)
    den = q * (q + qp + p + pp)
    return abs(_log2_ratio(num, den))


def _interval(word: Sequence[int], pooled_last: bool) -> tuple[Fraction, Fraction]:
    """x-interval of {x: digits of x begin with word}, the last digit meaning ">= it" if pooled_last."""
    if not word:
        return Fraction(0), Fraction(1)
    if not pooled_last:
        return cylinder_endpoints(word)
    # x = (p z + p') / (q z + q') with z = a_k + T^k x running over [D, infinity].
    p, q, pp, qp = convergents(word[:-1])
    d = word[-1]
    a, b = Fraction(p, q), Fraction(p * d + pp, q * d + qp)
    return (a, b) if a <= b else (b, a)


def _rectangle_measure_mp(x0, x1, y0, y1):
    """Natural-extension measure (1/ln2) ln[(1+x1 y1)(1+x0 y0)/((1+x0 y1)(1+x1 y0))] in mpmath."""
    return mpmath.log((1 + x1 * y1) * (1 + x0 * y0) / ((1 + x0 * y1) * (1 + x1 * y0))) / mpmath.log(2)


def _mpf(x: Fraction):
    return mpmath.mpf(x.numerator) / x.denominator


def _pooled_measure_mp(digits: tuple[int, ...], pooled: tuple[bool, ...], cap: int):
    """Gauss measure (mpmath) of {a_i = d_i where not pooled[i], a_i >= cap where pooled[i]}.

    Method: the natural extension of the Gauss map has density 1/(ln 2 (1 + x y)^2) on [0,1]^2 and is
    invariant, so shifting past the first i-1 digits turns the event into X x Y with Y the cylinder of
    the reversed prefix. A pooled symbol at the last place of a word keeps its set an interval; a
    pooled symbol at the first place of X makes X the union over a >= cap of 1/(a + J), whose rectangle
    measures multiply out to a ratio of Gamma functions (the factors telescope because
    alpha + beta = gamma + delta). With two or more pooled symbols strictly inside the word, the first
    of them is summed explicitly (mpmath.nsum) over its values.
    """
    k = len(digits)
    if not any(pooled):
        p, q, pp, qp = convergents(digits)
        return abs(mpmath.log(mpmath.mpf((q + p) * (q + qp)) / (q * (q + qp + p + pp)))) / mpmath.log(2)
    interior = [i for i in range(1, k - 1) if pooled[i]]
    if len(interior) >= 2:
        i = interior[0]
        fixed = pooled[:i] + (False,) + pooled[i + 1:]

        def term(a):
            return _pooled_measure_mp(digits[:i] + (int(a),) + digits[i + 1:], fixed, cap)

        return mpmath.nsum(term, [cap, mpmath.inf])
    if interior:
        i = interior[0]
    elif pooled[0]:
        i = 0
    else:
        # Pooled only at the end: a single interval.
        lo, hi = _interval(digits, True)
        return abs(mpmath.log((1 + _mpf(hi)) / (1 + _mpf(lo)))) / mpmath.log(2)
    prefix_rev = list(reversed(digits[:i]))
    y0, y1 = _interval(prefix_rev, bool(prefix_rev) and pooled[0])
    suffix = list(digits[i + 1:])
    s0, s1 = _interval(suffix, bool(suffix) and pooled[-1])
    d = mpmath.mpf(cap)
    y0, y1, s0, s1 = _mpf(y0), _mpf(y1), _mpf(s0), _mpf(s1)
    lg = mpmath.loggamma
    value = lg(d + s1 + y1) + lg(d + s0 + y0) - lg(d + s0 + y1) - lg(d + s1 + y0)
    return value / mpmath.log(2)


def _split(symbols: tuple[int, ...], cap: int):
    return tuple(min(s, cap) for s in symbols), tuple(s >= cap for s in symbols)


@lru_cache(maxsize=None)
def _word_measure_cached(symbols: tuple[int, ...], cap: int) -> float:
    if all(s < cap for s in symbols):
        return cylinder_measure(symbols)
    with mpmath.workdps(30):
        return float(_pooled_measure_mp(*_split(symbols, cap), cap))


def word_measure(symbols: Sequence[int], cap: int | None = None) -> float:
    """Gauss measure of a word over the capped alphabet.

    ``symbols`` are digits >= 1; with a ``cap`` D >= 2 every symbol >= D stands for the pooled symbol
    "D+" (the union over all digits >= D at that place). Without a cap the word is a plain cylinder.
    Returns a float64 (pooled words are evaluated at 30 significant digits first).
    """
    symbols = tuple(int(s) for s in symbols)
    if not symbols:
        raise ValueError("empty word")
    if any(s < 1 for s in symbols):
        raise ValueError(f"word {symbols} has a digit < 1")
    if cap is None:
        return cylinder_measure(symbols)
    if cap < 2:
        raise ValueError(f"cap {cap} out of range: cap >= 2")
    return _word_measure_cached(tuple(min(s, cap) for s in symbols), int(cap))


def word_measure_mp(symbols: Sequence[int], cap: int | None = None, dps: int | None = 40):
    """As :func:`word_measure` but returned as an mpmath number at ``dps`` digits (None: the current
    mpmath precision, as needed inside ``mpmath.nsum``, which raises the precision as it goes)."""
    symbols = tuple(int(s) for s in symbols)
    with mpmath.workdps(dps if dps is not None else mpmath.mp.dps):
        big = cap if cap is not None else max(symbols) + 1
        return +_pooled_measure_mp(*_split(symbols, big), big)
