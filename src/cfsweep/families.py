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

from dataclasses import dataclass, field

import numpy as np

from .errors import UsageError
from .kernels.sieve import prime_sieve, squarefree_sieve, totient_sieve

CLASSES = ("any", "squarefree", "prime")
BASES = ("all", "reduced")


@dataclass(frozen=True)
class Family:
    """A family of fractions: base (``all``/``reduced``), numerator/denominator classes, and an
    optional user predicate (see :mod:`cfsweep.predicates`), whose identity "module:function" shows in
    the canonical text as ``pred=module:function``."""

    base: str = "all"
    num: str = "any"
    den: str = "any"
    predicate: object = field(default=None, compare=False, hash=False, repr=False)
    predicate_name: str | None = None

    @property
    def canonical(self) -> str:
        parts = [self.base]
        if self.num != "any":
            parts.append(f"num={self.num}")
        if self.den != "any":
            parts.append(f"den={self.den}")
        if self.predicate_name:
            parts.append(f"pred={self.predicate_name}")
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
        if self.predicate is not None and not self.predicate(p, q):
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
    if isinstance(text, str) and "pred=" in text:
        from .predicates import family_with_predicate

        rest = ",".join(t for t in text.split(",") if not t.strip().startswith("pred="))
        spec = [t.strip()[5:] for t in text.split(",") if t.strip().startswith("pred=")][0]
        return family_with_predicate(parse_family(rest or "all"), spec)
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
            current = num if key == "num" else den
            if current is not None and current != value:
                raise UsageError(f"family {text!r}: {key} given twice ({current} and {value})")
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
    if family.predicate is not None:
        from .kernels.predicate import count_members

        num_ok, den_ok, coprime_only = family.membership(q_hi)
        return [int(v) for v in count_members(q_lo, q_hi, num_ok, den_ok, coprime_only, family.predicate)]
    if family.num == "any" and family.den == "any":
        if family.base == "all":
            return [q - 1 for q in range(q_lo, q_hi + 1)]
        phi = totient_sieve(q_hi)
        return [int(v) for v in phi[q_lo:q_hi + 1]]
    return _class_counts(family, q_lo, q_hi)


def _class_counts(family: Family, q_lo: int, q_hi: int) -> list[int]:
    """Members per denominator for families with numerator/denominator classes, from sieves.

    ``all`` base: den_ok(q) * #{admissible p < q} (a prefix count of the numerator sieve).
    ``reduced`` base: den_ok(q) times, for numerators ``any``: phi(q); ``prime``: pi(q-1) minus the
    primes dividing q; ``squarefree``: S(q-1, rad q), the square-free m <= q-1 coprime to q, from the
    recursion S(x, d) = S(x, d/r) - S(floor(x/r), d) for a prime r | d (square-free m <= x coprime to
    d/r split by whether r | m) with S(x, 1) the prefix count of the square-free sieve.
    """
    num_ok = _class_array(family.num, q_hi)
    den_ok = _class_array(family.den, q_hi)
    den = np.ones(q_hi + 1, np.int64) if den_ok.size == 0 else den_ok.astype(np.int64)
    if num_ok.size == 0:
        prefix = np.arange(-1, q_hi, dtype=np.int64).clip(0)  # prefix[q] = #{1 <= p <= q-1}
    else:
        prefix = np.concatenate([[0], np.cumsum(num_ok.astype(np.int64))[:-1]])  # p <= q-1
    qs = np.arange(q_lo, q_hi + 1)
    if family.base == "all":
        return [int(v) for v in (den[qs] * prefix[qs])]
    spf = _smallest_prime_factor(q_hi)
    out = []
    if family.num == "any":
        phi = totient_sieve(q_hi)
        return [int(v) for v in den[qs] * phi[qs]]
    sq_prefix = np.cumsum(squarefree_sieve(q_hi).astype(np.int64)) if family.num == "squarefree" else None
    for q in qs.tolist():
        if den[q] == 0:
            out.append(0)
            continue
        primes = _prime_factors(q, spf)
        if family.num == "prime":
            out.append(int(prefix[q]) - sum(1 for r in primes if r < q))
        else:
            out.append(_squarefree_coprime(q - 1, tuple(primes), sq_prefix))
    return out


def _smallest_prime_factor(n: int) -> np.ndarray:
    spf = np.zeros(n + 1, np.int64)
    for d in range(2, n + 1):
        if spf[d] == 0:
            spf[d::d][spf[d::d] == 0] = d
    return spf


def _prime_factors(q: int, spf: np.ndarray) -> list[int]:
    primes = []
    while q > 1:
        r = int(spf[q])
        primes.append(r)
        while q % r == 0:
            q //= r
    return primes


def _squarefree_coprime(x: int, primes: tuple[int, ...], sq_prefix: np.ndarray) -> int:
    """#{1 <= m <= x : m square-free, gcd(m, prod primes) = 1} by the recursion in _class_counts."""
    if x <= 0:
        return 0
    if not primes:
        return int(sq_prefix[x])
    r, rest = primes[0], primes[1:]
    return _squarefree_coprime(x, rest, sq_prefix) - _squarefree_coprime(x // r, primes, sq_prefix)
