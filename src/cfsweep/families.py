"""Families of rationals p/q (1 <= p < q): grammar, canonical text and membership arrays.

Grammar (case-insensitive, comma-separated terms, order free):

* a base: ``all`` (non-reduced fractions included, the default) or ``reduced`` (gcd(p, q) = 1);
* ``num=CLASS`` and ``den=CLASS`` with CLASS one of ``any``, ``squarefree``, ``prime``;
* shorthands: ``squarefree`` = ``num=squarefree,den=squarefree`` and ``prime`` =
  ``num=prime,den=prime`` (both keep the base, ``all`` unless ``reduced`` is also given).

The canonical text is the base followed by the non-``any`` classes in the order num, den, e.g.
``all``, ``reduced``, ``all,num=squarefree,den=squarefree``, ``reduced,den=squarefree``,
``all,num=squarefree,den=prime``. Non-reduced members are kept wherever the classes admit them
(2/6 is in ``squarefree``: 2 and 6 are square-free).
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .errors import UsageError
from .kernels.sieve import prime_sieve, squarefree_sieve, totient_sieve

CLASSES = ("any", "squarefree", "prime")
BASES = ("all", "reduced")


@dataclass(frozen=True)
class Family:
    """A family of fractions: base (``all``/``reduced``) and numerator/denominator classes."""

    base: str = "all"
    num: str = "any"
    den: str = "any"

    @property
    def canonical(self) -> str:
        parts = [self.base]
        if self.num != "any":
            parts.append(f"num={self.num}")
        if self.den != "any":
            parts.append(f"den={self.den}")
        return ",".join(parts)

    @property
    def coprime_only(self) -> bool:
        return self.base == "reduced"

    def __str__(self) -> str:
        return self.canonical

    def membership(self, max_den: int) -> tuple[np.ndarray, np.ndarray, bool]:
        """(num_ok, den_ok, coprime_only) for the sweep kernels, valid for q <= max_den.

        An empty array means that every value is admissible.
        """
        return _class_array(self.num, max_den), _class_array(self.den, max_den), self.coprime_only

    def contains(self, p: int, q: int) -> bool:
        """Plain-Python membership test for one pair (1 <= p < q), used by slow twins."""
        import math

        if not (1 <= p < q):
            return False
        if self.coprime_only and math.gcd(p, q) != 1:
            return False
        return _in_class(self.num, p) and _in_class(self.den, q)


def _class_array(cls: str, n: int) -> np.ndarray:
    if cls == "any":
        return np.zeros(0, np.uint8)
    if cls == "squarefree":
        return squarefree_sieve(n)
    return prime_sieve(n)


def _in_class(cls: str, m: int) -> bool:
    if cls == "any":
        return True
    if cls == "squarefree":
        d = 2
        while d * d <= m:
            if m % (d * d) == 0:
                return False
            d += 1
        return m >= 1
    if m < 2:
        return False
    d = 2
    while d * d <= m:
        if m % d == 0:
            return False
        d += 1
    return True


def parse_family(text: str | Family) -> Family:
    """Parse the family grammar (see module docstring); raise UsageError naming the bad term."""
    if isinstance(text, Family):
        return text
    allowed = "allowed: all, reduced, squarefree, prime, num=CLASS, den=CLASS with CLASS in any|squarefree|prime"
    if not isinstance(text, str) or not text.strip():
        raise UsageError(f"family {text!r} is empty; {allowed}")
    base, num, den = "all", None, None
    for raw in text.lower().split(","):
        term = raw.strip()
        if term in BASES:
            base = term
        elif term in ("squarefree", "prime"):
            if (num is not None and num != term) or (den is not None and den != term):
                raise UsageError(f"family {text!r}: shorthand {term!r} conflicts with a class given before")
            num = den = term
        elif "=" in term:
            key, _, value = term.partition("=")
            key, value = key.strip(), value.strip()
            if key not in ("num", "den") or value not in CLASSES:
                raise UsageError(f"family {text!r}: unknown term {term!r}; {allowed}")
            if key == "num":
                num = value
            else:
                den = value
        else:
            raise UsageError(f"family {text!r}: unknown term {term!r}; {allowed}")
    return Family(base, num or "any", den or "any")


def expected_members(family: Family, q_lo: int, q_hi: int) -> list[int]:
    """Number of members with each denominator q_lo..q_hi, by counting (never by expanding fractions).

    ``all``: q - 1; ``reduced``: Euler's phi(q) from a totient sieve. Numerator/denominator classes are
    counted from their sieves (see :func:`_class_counts`).
    """
    if family.num == "any" and family.den == "any":
        if family.base == "all":
            return [q - 1 for q in range(q_lo, q_hi + 1)]
        phi = totient_sieve(q_hi)
        return [int(v) for v in phi[q_lo:q_hi + 1]]
    return _class_counts(family, q_lo, q_hi)


def _class_counts(family: Family, q_lo: int, q_hi: int) -> list[int]:
    raise UsageError(f"family {family.canonical!r} is not supported by this version")
