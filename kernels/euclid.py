"""Expansion primitives: the shorter continued fraction of p/q by Euclid's algorithm.

For 0 < p < q the quotients of Euclid's algorithm on (q, p) are the partial quotients a1..an of the
shorter expansion p/q = [0; a1, ..., an] with an >= 2 (n >= 1). A non-reduced p/q yields the digits of
its reduced form, and the last remainder-before-zero is gcd(p, q).
"""
import numpy as np

from ._jit import serial

# Longest expansion of any p/q with q < 2**63: Euclid needs at most about log_phi(q) steps (92 fits).
MAX_LENGTH = 128


@serial
def expand(p, q, out):
    """Write the partial quotients of p/q (0 < p < q < 2**63) into ``out``; return (length, gcd)."""
    x = np.int64(q)
    y = np.int64(p)
    n = 0
    while y != 0:
        a = x // y
        r = x - a * y
        out[n] = a
        n += 1
        x = y
        y = r
    return n, x


@serial
def expansion_length(p, q):
    """Number of partial quotients of the shorter expansion of p/q (0 < p < q)."""
    x = np.int64(q)
    y = np.int64(p)
    n = 0
    while y != 0:
        r = x % y
        n += 1
        x = y
        y = r
    return n
