"""Parameters of (eps, k)-goodness: validation and the finite sets of words that must occur.

Definition (documented in the README): a rational p/q of length n is (eps, K)-good when n >= L_min and
for every word w of length <= K over the full, unpooled alphabet |count_w / (n - |w| + 1) - mu(w)| <= eps,
where mu is the Gauss measure. Words that do not occur count with frequency 0, so every word with
mu(w) > eps must occur; :func:`required_words` lists that finite set.
"""
from __future__ import annotations

import numpy as np

from .errors import UsageError
from .gauss import word_measure

MAX_GOOD_K = 6


def required_words(eps: float, max_k: int) -> list[tuple[int, ...]]:
    """All words w with 1 <= |w| <= max_k and mu(w) > eps, by depth-first extension.

    Extending a word only shrinks its cylinder, and the union of the cylinders [w, b'] over b' >= b is an
    interval whose exact measure bounds every one of them, so the search over the next digit b stops
    once that tail measure is <= eps.
    """
    out: list[tuple[int, ...]] = []

    def tail(prefix: tuple[int, ...], b: int) -> float:
        """Measure of the union of [prefix, b'] over b' >= b (b = 1: the cylinder of prefix itself)."""
        if b == 1:
            return word_measure(prefix) if prefix else 1.0
        return word_measure(prefix + (b,), cap=b)

    def extend(prefix: tuple[int, ...]):
        b = 1
        while tail(prefix, b) > eps:
            w = prefix + (b,)
            if word_measure(w) > eps:
                out.append(w)
                if len(w) < max_k:
                    extend(w)
            b += 1

    extend(())
    return sorted(out, key=lambda w: (len(w), w))


def required_counts(eps_values, max_k: int) -> np.ndarray:
    """required[e, k] = number of words of length k with mu > eps_values[e] (column 0 unused)."""
    out = np.zeros((len(eps_values), max_k + 1), np.int64)
    for e, eps in enumerate(eps_values):
        for w in required_words(float(eps), max_k):
            out[e, len(w)] += 1
    return out


def check_goodness_params(eps_values, max_k, min_len) -> tuple[tuple[float, ...], int, int]:
    """Validate --good-eps (each 0 < eps < 1), --good-k (1..6) and --good-min-len (>= 1; default K)."""
    values = []
    for raw in eps_values:
        try:
            v = float(raw)
        except (TypeError, ValueError):
            raise UsageError(f"--good-eps value {raw!r} is not a number; allowed: 0 < eps < 1") from None
        if not (0.0 < v < 1.0):
            raise UsageError(f"--good-eps value {raw!r} is out of range; allowed: 0 < eps < 1")
        values.append(v)
    if not values:
        raise UsageError("--good-eps is empty; allowed: one or more values 0 < eps < 1, comma-separated")
    if len(set(values)) != len(values):
        raise UsageError(f"--good-eps {','.join(map(str, eps_values))} repeats a value; allowed: distinct values")
    if not (1 <= max_k <= MAX_GOOD_K):
        raise UsageError(f"--good-k {max_k} is out of range; allowed: 1 <= --good-k <= {MAX_GOOD_K}")
    if min_len is None:
        min_len = max_k
    if not (1 <= min_len <= 10**6):
        raise UsageError(f"--good-min-len {min_len} is out of range; allowed: 1 <= --good-min-len <= 1000000")
    return tuple(sorted(values)), max_k, min_len
