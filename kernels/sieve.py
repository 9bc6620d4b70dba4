"""Sieves for family membership: square-free indicator and primes up to n (uint8 arrays of n + 1)."""
import numpy as np

from ._jit import serial


@serial
def squarefree_sieve(n):
    """out[m] = 1 iff m >= 1 is square-free, for 0 <= m <= n (out[0] = 0)."""
    out = np.ones(n + 1, np.uint8)
    out[0] = 0
    d = 2
    while d * d <= n:
        sq = d * d
        for m in range(sq, n + 1, sq):
            out[m] = 0
        d += 1
    return out


@serial
def prime_sieve(n):
    """out[m] = 1 iff m is prime, for 0 <= m <= n (Eratosthenes)."""
    out = np.ones(n + 1, np.uint8)
    out[0] = 0
    if n >= 1:
        out[1] = 0
    d = 2
    while d * d <= n:
        if out[d]:
            for m in range(d * d, n + 1, d):
                out[m] = 0
        d += 1
    return out


@serial
def totient_sieve(n):
    """out[m] = Euler's phi(m) for 0 <= m <= n (out[0] = 0), int64."""
    out = np.arange(n + 1).astype(np.int64)
    for d in range(2, n + 1):
        if out[d] == d:  # d is prime: not yet touched
            for m in range(d, n + 1, d):
                out[m] -= out[m] // d
    return out
