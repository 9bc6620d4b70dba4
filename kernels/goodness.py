"""Per-rational (eps, k)-goodness against the exact, unpooled Gauss measure.

A rational of length n is (eps, K)-good when n >= min_len and, for every word w with |w| <= K over the
full alphabet, |count_w / (n - |w| + 1) - mu(w)| <= eps. Words that do not occur have frequency 0, so a
good rational must contain every word with mu(w) > eps; that finite set is counted once per (eps, k) by
the caller (``required[e, k]``) and compared with the number of distinct such words present.
"""
import math

import numpy as np

from ._jit import serial

_INV_LN2 = 1.0 / math.log(2.0)


@serial
def cylinder_measure_f64(digits, start, k):
    """Gauss measure of the cylinder [digits[start], ..., digits[start+k-1]] in float64.

    Uses mu = |log2(1 + (-1)^k / (q_k (q_k + q_{k-1} + p_k + p_{k-1})))|, the cylinder formula with the
    determinant identity p_k q_{k-1} - q_k p_{k-1} = (-1)^(k+1) (so no cancellation for long words).
    Convergents are carried in float64: relative error about k * 1e-16, far below any tolerance eps.
    """
    p_prev, q_prev, p, q = 1.0, 0.0, 0.0, 1.0
    for i in range(k):
        a = float(digits[start + i])
        p_prev, q_prev, p, q = p, q, a * p + p_prev, a * q + q_prev
    den = q * (q + q_prev + p + p_prev)
    sign = 1.0 if k % 2 == 1 else -1.0
    return abs(math.log1p(sign / den)) * _INV_LN2


@serial
def rational_goodness(digits, n, max_k, min_len, eps, required, good_out):
    """Set good_out[e] = 1 if the rational with partial quotients digits[:n] is (eps[e], max_k)-good.

    ``eps``: float64 tolerances (any order); ``required[e, k]``: number of words of length k with
    mu > eps[e] (k = 1..max_k). Words are compared digit by digit (no capping), O(n^2 k) per rational.
    """
    n_eps = eps.shape[0]
    for e in range(n_eps):
        good_out[e] = 0
    if n < min_len:
        return
    present = np.zeros(n_eps, np.int64)
    max_dev = 0.0
    for k in range(1, max_k + 1):
        m = n - k + 1
        for e in range(n_eps):
            present[e] = 0
        if m > 0:
            for j in range(m):
                first = True
                for jp in range(j):
                    same = True
                    for i in range(k):
                        if digits[jp + i] != digits[j + i]:
                            same = False
                            break
                    if same:
                        first = False
                        break
                if not first:
                    continue
                c = 1
                for jn in range(j + 1, m):
                    same = True
                    for i in range(k):
                        if digits[jn + i] != digits[j + i]:
                            same = False
                            break
                    if same:
                        c += 1
                mu = cylinder_measure_f64(digits, j, k)
                dev = abs(c / m - mu)
                if dev > max_dev:
                    max_dev = dev
                for e in range(n_eps):
                    if mu > eps[e]:
                        present[e] += 1
        for e in range(n_eps):
            if present[e] != required[e, k]:
                good_out[e] = 2  # marks "a required word is missing" until the end
    for e in range(n_eps):
        if good_out[e] == 2:
            good_out[e] = 0
        else:
            good_out[e] = 1 if max_dev <= eps[e] else 0
