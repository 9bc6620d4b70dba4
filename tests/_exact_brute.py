"""Plain-Python brute force for the exact-counter tests: Euclid on every p/q, memoised per denominator."""
from __future__ import annotations

import math
from functools import lru_cache


def expansion(p: int, q: int) -> list[int]:
    """Partial quotients of the shorter expansion of p/q (0 < p < q) by integer Euclid."""
    out = []
    x, y = q, p
    while y:
        out.append(x // y)
        x, y = y, x % y
    return out


@lru_cache(maxsize=None)
def per_denominator(q: int, words: tuple[tuple[int, ...], ...], cap: int):
    """For denominator q: per family (all, reduced) a dict with fractions, total, digits[cap+1], words, lengths."""
    res = []
    for coprime in (False, True):
        digits = [0] * (cap + 1)
        wc = {w: 0 for w in words}
        lengths = {}
        fractions = total = 0
        for p in range(1, q):
            if coprime and math.gcd(p, q) != 1:
                continue
            a = expansion(p, q)
            fractions += 1
            total += len(a)
            lengths[len(a)] = lengths.get(len(a), 0) + 1
            for d in a:
                digits[min(d, cap)] += 1
            for w in words:
                k = len(w)
                wc[w] += sum(1 for j in range(len(a) - k + 1) if tuple(a[j:j + k]) == w)
        res.append(dict(fractions=fractions, total=total, digits=digits, words=wc, lengths=lengths))
    return res


def cumulative(max_q: int, words: tuple[tuple[int, ...], ...], cap: int):
    """List indexed by Q (0..max_q) of per-family cumulative dicts as in :func:`per_denominator`."""
    empty = lambda: dict(fractions=0, total=0, digits=[0] * (cap + 1), words={w: 0 for w in words}, lengths={})
    acc = [empty(), empty()]
    out = [None, [dict(x, digits=list(x["digits"]), words=dict(x["words"]), lengths=dict(x["lengths"])) for x in acc]]
    for q in range(2, max_q + 1):
        for f, part in enumerate(per_denominator(q, words, cap)):
            a = acc[f]
            a["fractions"] += part["fractions"]
            a["total"] += part["total"]
            for i, v in enumerate(part["digits"]):
                a["digits"][i] += v
            for w, v in part["words"].items():
                a["words"][w] += v
            for n, v in part["lengths"].items():
                a["lengths"][n] = a["lengths"].get(n, 0) + v
        out.append([dict(x, digits=list(x["digits"]), words=dict(x["words"]), lengths=dict(x["lengths"])) for x in acc])
    out[0] = out[1]
    return out
