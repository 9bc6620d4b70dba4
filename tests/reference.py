"""Slow, obviously-correct twins used by the tests (plain Python, fractions, sympy)."""
from __future__ import annotations

import math
from collections import Counter
from fractions import Fraction

import sympy


def cf_fraction(p: int, q: int) -> list[int]:
    """Shorter continued fraction of p/q (0 < p < q) by iterating x -> 1/x - floor(1/x) on Fractions."""
    x = Fraction(p, q)
    digits = []
    while x != 0:
        x = 1 / x
        a = math.floor(x)
        digits.append(a)
        x -= a
    return digits


def cf_sympy(p: int, q: int) -> list[int]:
    """sympy.continued_fraction of p/q without the leading 0, as the shorter expansion."""
    terms = sympy.continued_fraction(sympy.Rational(p, q))
    return [int(t) for t in terms[1:]]


def in_class(cls: str, m: int) -> bool:
    if cls == "any":
        return True
    if cls == "prime":
        return bool(sympy.isprime(m))
    return m >= 1 and all(e == 1 for e in sympy.factorint(m).values())


def member(base: str, num: str, den: str, p: int, q: int) -> bool:
    if base == "reduced" and math.gcd(p, q) != 1:
        return False
    return in_class(num, p) and in_class(den, q)


def symbol_word(digits, cap):
    return tuple(min(a, cap) for a in digits)


def reference_sweep(q_lo, q_hi, base="all", num="any", den="any", cap=32, max_k=3):
    """All sweep outputs from first principles.

    Returns dict with: words {symbols: [sum_c, sum_c2, sum_cm]}, positions {k: [sum_m, sum_m2]},
    lengths Counter, per_den {q: (members, pqs, d1..d4 or -1)}.
    """
    words, positions, lengths, per_den = {}, {k: [0, 0] for k in range(1, max_k + 1)}, Counter(), {}
    for q in range(q_lo, q_hi + 1):
        members = pqs = 0
        dcount = Counter()
        for p in range(1, q):
            if not member(base, num, den, p, q):
                continue
            digits = cf_fraction(p, q)
            n = len(digits)
            members += 1
            pqs += n
            lengths[n] += 1
            dcount.update(digits)
            for k in range(1, max_k + 1):
                m = max(0, n - k + 1)
                positions[k][0] += m
                positions[k][1] += m * m
                c = Counter(symbol_word(digits[j:j + k], cap) for j in range(m))
                for w, cw in c.items():
                    acc = words.setdefault(w, [0, 0, 0])
                    acc[0] += cw
                    acc[1] += cw * cw
                    acc[2] += cw * m
        per_den[q] = (members, pqs) + tuple(dcount[d] if d < cap else -1 for d in range(1, 5))
    return {"words": words, "positions": positions, "lengths": lengths, "per_den": per_den}
