"""Plain-Python twins for the stream tests: Fraction continued fractions and sympy membership.

Nothing here uses cfsweep code, so that the tests compare the tool against independent references.
"""
from __future__ import annotations

import math
from functools import lru_cache

import sympy

from reference import cf_fraction


@lru_cache(maxsize=None)
def is_prime(m: int) -> bool:
    return bool(sympy.isprime(m))


@lru_cache(maxsize=None)
def is_squarefree(m: int) -> bool:
    return m >= 1 and all(e == 1 for e in sympy.factorint(m).values())


def _class_ok(cls: str, m: int) -> bool:
    return cls == "any" or (cls == "prime" and is_prime(m)) or (cls == "squarefree" and is_squarefree(m))


# family text -> (reduced only, numerator class, denominator class), written out by hand.
FAMILIES = {
    "all": (False, "any", "any"),
    "reduced": (True, "any", "any"),
    "squarefree": (False, "squarefree", "squarefree"),
    "prime": (False, "prime", "prime"),
    "reduced,den=squarefree": (True, "any", "squarefree"),
    "all,num=prime": (False, "prime", "any"),
    "den=prime": (False, "any", "prime"),
}


def reference_members(family: str):
    reduced, num, den = FAMILIES[family]
    q = 2
    while True:
        if _class_ok(den, q):
            for p in range(1, q):
                if reduced and math.gcd(p, q) != 1:
                    continue
                if _class_ok(num, p):
                    yield p, q
        q += 1


_CACHE: dict[str, tuple[list[int], list[tuple[int, int, int]]]] = {}


def reference_stream(family: str, terms: int) -> tuple[list[int], list[tuple[int, int, int]]]:
    """(digits, cursors): the first ``terms`` digits of the stream and, for each, the end position
    (q, p, digits of p/q included) of the prefix that ends with it. Cached per family for the session."""
    digits, cursors = _CACHE.get(family, ([], []))
    if len(digits) < terms:
        digits, cursors = [], []
        for p, q in reference_members(family):
            for i, a in enumerate(cf_fraction(p, q)):
                digits.append(a)
                cursors.append((q, p, i + 1))
            if len(digits) >= terms:
                break
        _CACHE[family] = (digits, cursors)
    return digits[:terms], cursors[:terms]
