"""Per-rational (eps, k)-goodness against the exact, unpooled Gauss measure.

A rational of length n is (eps, K)-good when n >= min_len and, for every word w with |w| <= K over the
full alphabet, |count_w / (n - |w| + 1) - mu(w)| <= eps. Words that do not occur have frequency 0, so a
good rational must contain every word with mu(w) > eps; that finite set is counted once per (eps, k) by
the caller (``required[e, k]``) and compared with the number of distinct such words present.
"""
import math

import numpy as np

from numba import prange

from ._jit import parallel, serial
from .euclid import MAX_LENGTH, expand

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
def _same_window(digits, a, b, k):
    """True if digits[a:a+k] == digits[b:b+k]."""
    for i in range(k):
        if digits[a + i] != digits[b + i]:
            return False
    return True


# Gauss measures of the words of one, two and three digits below these bounds are looked up in
# tables filled by cylinder_measure_f64 itself (so the values are the same doubles); longer words and
# larger digits are computed.
MU1_DIGITS = 1024
MU2_DIGITS = 64
MU3_DIGITS = 16
# the codes of all three tables index one scratch table of counts
CODES = max(MU1_DIGITS, MU2_DIGITS ** 2, MU3_DIGITS ** 3)


@serial
def mu_tables():
    """(mu1, mu2, mu3): mu1[a] = mu([a]) for 1 <= a < MU1_DIGITS, mu2[a * MU2_DIGITS + b] = mu([a, b]),
    mu3[(a * MU3_DIGITS + b) * MU3_DIGITS + c] = mu([a, b, c])."""
    word = np.empty(3, np.int64)
    mu1 = np.zeros(MU1_DIGITS, np.float64)
    for a in range(1, MU1_DIGITS):
        word[0] = a
        mu1[a] = cylinder_measure_f64(word, 0, 1)
    mu2 = np.zeros(MU2_DIGITS * MU2_DIGITS, np.float64)
    for a in range(1, MU2_DIGITS):
        for b in range(1, MU2_DIGITS):
            word[0] = a
            word[1] = b
            mu2[a * MU2_DIGITS + b] = cylinder_measure_f64(word, 0, 2)
    mu3 = np.zeros(MU3_DIGITS ** 3, np.float64)
    for a in range(1, MU3_DIGITS):
        for b in range(1, MU3_DIGITS):
            for c in range(1, MU3_DIGITS):
                word[0] = a
                word[1] = b
                word[2] = c
                mu3[(a * MU3_DIGITS + b) * MU3_DIGITS + c] = cylinder_measure_f64(word, 0, 3)
    return mu1, mu2, mu3


@serial
def _small_code(digits, j, k):
    """The table index of the word at position j of length k (1, 2 or 3, digits below the table
    bounds), or -1 for any other word."""
    if k == 1:
        return digits[j] if digits[j] < MU1_DIGITS else -1
    if k == 2:
        if digits[j] < MU2_DIGITS and digits[j + 1] < MU2_DIGITS:
            return digits[j] * MU2_DIGITS + digits[j + 1]
        return -1
    if k == 3 and digits[j] < MU3_DIGITS and digits[j + 1] < MU3_DIGITS and digits[j + 2] < MU3_DIGITS:
        return (digits[j] * MU3_DIGITS + digits[j + 1]) * MU3_DIGITS + digits[j + 2]
    return -1


@serial
def _rational_goodness(digits, n, max_k, min_len, eps, required, good_out, present, seen, counts, mu1,
                       mu2, mu3):
    """:func:`rational_goodness` with its scratch (``present``: n_eps, ``seen``: >= n entries,
    ``counts``: CODES zeros, left zero) and the measure tables of :func:`mu_tables` passed in,
    so that a sweep allocates nothing per rational.

    Words of one, two or three digits below the table bounds (nearly all) are counted in ``counts``
    by code, in two passes over the rational; any other word is counted from its first position,
    comparing digit by digit and marking its later positions as seen. Either way each distinct word
    is met once, at its first position, and its measure comes from the tables when its digits are
    small.
    """
    n_eps = eps.shape[0]
    for e in range(n_eps):
        good_out[e] = 0
    if n < min_len:
        return
    max_dev = 0.0
    for k in range(1, max_k + 1):
        m = n - k + 1
        for e in range(n_eps):
            present[e] = 0
        if m > 0:
            for j in range(m):
                seen[j] = 0
                code = _small_code(digits, j, k)
                if code >= 0:
                    counts[code] += 1
            for j in range(m):
                code = _small_code(digits, j, k)
                if code >= 0:
                    # branch-free: a later position of a word reads c = 0 and adds nothing
                    c = counts[code]
                    counts[code] = 0
                    mu = mu1[code] if k == 1 else (mu2[code] if k == 2 else mu3[code])
                    first = np.int64(c > 0)
                    max_dev = max(max_dev, abs(c / m - mu) * first)
                    for e in range(n_eps):
                        present[e] += np.int64(mu > eps[e]) & first
                    continue
                if seen[j] != 0:
                    continue
                c = 1
                for jn in range(j + 1, m):
                    if seen[jn] == 0 and _same_window(digits, jn, j, k):
                        seen[jn] = 1
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


@serial
def rational_goodness(digits, n, max_k, min_len, eps, required, good_out):
    """Set good_out[e] = 1 if the rational with partial quotients digits[:n] is (eps[e], max_k)-good.

    ``eps``: float64 tolerances (any order); ``required[e, k]``: number of words of length k with
    mu > eps[e] (k = 1..max_k). Words are compared exactly (no capping). For one rational at a time:
    it builds the measure tables and scratch on every call (the block kernels build them once).
    """
    mu1, mu2, mu3 = mu_tables()
    _rational_goodness(digits, n, max_k, min_len, eps, required, good_out, np.zeros(eps.shape[0], np.int64),
                       np.zeros(max(n, 1), np.uint8), np.zeros(CODES, np.int64), mu1, mu2, mu3)


@serial
def _goodness_chunk(q_lo, q_hi, q_step, num_ok, den_ok, coprime_only, max_k, min_len, eps, required, mu1,
                    mu2, mu3, out):
    has_num = num_ok.shape[0] > 0
    has_den = den_ok.shape[0] > 0
    n_eps = eps.shape[0]
    digits = np.empty(MAX_LENGTH, np.int64)
    flags = np.zeros(n_eps, np.uint8)
    present = np.zeros(n_eps, np.int64)
    seen = np.zeros(MAX_LENGTH, np.uint8)
    counts = np.zeros(CODES, np.int64)
    mirror_digits = np.empty(MAX_LENGTH, np.int64)
    q = q_lo
    while q <= q_hi:
        i = q - q_lo
        if (not has_den) or den_ok[q] != 0:
            # p/q with 2p < q and its mirror (q - p)/q = [0; 1, a1 - 1, a2, ..., an] from one expansion
            # (a1 >= 2; gcd(q - p, q) = gcd(p, q)); the middle p = q/2 of even q is its own mirror
            for p in range(1, q // 2 + 1):
                own = (not has_num) or num_ok[p] != 0
                mirror = 2 * p < q and ((not has_num) or num_ok[q - p] != 0)
                if not (own or mirror):
                    continue
                n, g = expand(p, q, digits)
                if coprime_only and g != 1:
                    continue
                if own:
                    _rational_goodness(digits, n, max_k, min_len, eps, required, flags, present, seen,
                                       counts, mu1, mu2, mu3)
                    for e in range(n_eps):
                        out[i, e] += flags[e]
                if mirror:
                    mirror_digits[0] = 1
                    mirror_digits[1] = digits[0] - 1
                    for j in range(1, n):
                        mirror_digits[j + 1] = digits[j]
                    _rational_goodness(mirror_digits, n + 1, max_k, min_len, eps, required, flags, present,
                                       seen, counts, mu1, mu2, mu3)
                    for e in range(n_eps):
                        out[i, e] += flags[e]
        q += q_step


@parallel
def goodness_block(q_lo, q_hi, num_ok, den_ok, coprime_only, max_k, min_len, eps, required, n_chunks):
    """good[q - q_lo, e] = number of (eps[e], max_k)-good members with denominator q, q_lo <= q <= q_hi.

    Membership arrays as in :mod:`cfsweep.kernels.sweep`; denominators are dealt to ``n_chunks``
    chunks cyclically and each row is written by one chunk only.
    """
    out = np.zeros((q_hi - q_lo + 1, eps.shape[0]), np.int64)
    mu1, mu2, mu3 = mu_tables()
    for c in prange(n_chunks):
        if q_lo + c <= q_hi:
            _goodness_chunk(q_lo + c, q_hi, n_chunks, num_ok, den_ok, coprime_only, max_k, min_len, eps,
                            required, mu1, mu2, mu3, out[c:])
    return out


@parallel
def goodness_pairs(ps, qs, bin_edges, max_k, min_len, eps, required, n_chunks):
    """Per bin b (bin_edges[b] <= q < bin_edges[b+1]): counts[b, 0] members, counts[b, 1 + e] good ones.

    ``ps``, ``qs``: uint64 pairs 0 < p < q < 2**63 (not necessarily reduced); ``bin_edges`` increasing
    uint64. Integer Euclid in int64 (exact for every such q).
    """
    n_bins = bin_edges.shape[0] - 1
    n_eps = eps.shape[0]
    partial = np.zeros((n_chunks, n_bins, 1 + n_eps), np.int64)
    total = ps.shape[0]
    mu1, mu2, mu3 = mu_tables()
    for c in prange(n_chunks):
        digits = np.empty(MAX_LENGTH, np.int64)
        flags = np.zeros(n_eps, np.uint8)
        present = np.zeros(n_eps, np.int64)
        seen = np.zeros(MAX_LENGTH, np.uint8)
        counts = np.zeros(CODES, np.int64)
        for i in range(c, total, n_chunks):
            q = np.uint64(qs[i])
            n, _ = expand(np.int64(ps[i]), np.int64(q), digits)  # q < 2**63 fits int64
            b = np.searchsorted(bin_edges, q, side="right") - 1
            if b < 0 or b >= n_bins:
                continue
            _rational_goodness(digits, n, max_k, min_len, eps, required, flags, present, seen, counts, mu1,
                               mu2, mu3)
            partial[c, b, 0] += 1
            for e in range(n_eps):
                partial[c, b, 1 + e] += flags[e]
    out = np.zeros((n_bins, 1 + n_eps), np.int64)
    for c in range(n_chunks):
        out += partial[c]
    return out
