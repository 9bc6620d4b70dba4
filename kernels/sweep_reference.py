"""Plain reference sweep: the original simple kernel, kept as the exact twin of kernels/sweep.py.

One Euclid chain at a time, int64 ``//``, a per-rational scratch table for the word counts: slow
(tens of millions of partial quotients per second) but short enough to check by eye. The fast kernels
in :mod:`sweep` must give bit-identical integers; the tests compare them.

Everything here is exact integer arithmetic. A block is the set of family members p/q with
q_lo <= q <= q_hi (2 <= q_lo <= q_hi < 2**31 for sweeps), visited q by q; the family is given as
membership arrays so that this module never needs to know about family grammar:

* ``num_ok[p]`` / ``den_ok[q]`` (uint8): 1 if p (q) is an admissible numerator (denominator);
  an empty array means "every value is admissible".
* ``coprime_only``: keep only gcd(p, q) = 1.

Symbols and words. With cap D >= 2 a digit a maps to the symbol index min(a, D) - 1 in [0, D-1]; the
index D-1 is the pooled symbol "D+". A word of length k (1 <= k <= K) has the code
sum_i s_i * D**(k-1-i) and lives at row ``word_offset(D, k) + code`` of the word tables.

Outputs of :func:`sweep_block` (all int64):

* ``word_sums[n_words, 3]``: per word, over rationals r of the block, sum c_r, sum c_r**2 and
  sum c_r*m_r, where c_r is the number of occurrences of the word in r and m_r = max(0, n_r - k + 1)
  the number of positions of that length in r.
* ``position_sums[K+1, 2]``: per word length k, sum m_r and sum m_r**2 (row 0 unused).
* ``length_hist[MAX_LENGTH+1]``: number of rationals with each expansion length.
* ``per_den[q_hi-q_lo+1, ROW_COLUMNS]``: per denominator: members, partial quotients, and the counts of
  the digits 1..ROW_DIGITS (-1 where d >= cap, because the digit is then pooled).
"""
import numpy as np
from numba import prange

from ._jit import parallel, serial
from .euclid import MAX_LENGTH

ROW_DIGITS = 4
ROW_COLUMNS = 2 + ROW_DIGITS


@serial
def word_offset(cap, k):
    """Row of the first word of length k in the word tables (k >= 1)."""
    off = 0
    width = 1
    for _ in range(1, k):
        width *= cap
        off += width
    return off


@serial
def n_word_rows(cap, max_k):
    """Total rows of the word tables for words of length 1..max_k over ``cap`` symbols."""
    return word_offset(cap, max_k + 1)


@serial
def _reference_chunk(q_lo, q_hi, q_step, num_ok, den_ok, coprime_only, cap, max_k,
                 word_sums, position_sums, length_hist, per_den):
    """Sweep q = q_lo, q_lo + q_step, ... <= q_hi, adding into the given (zeroed or partial) arrays."""
    has_num = num_ok.shape[0] > 0
    has_den = den_ok.shape[0] > 0
    n_words = word_sums.shape[0]
    scratch = np.zeros(n_words, np.int64)
    digits = np.empty(MAX_LENGTH, np.int64)
    rows = np.empty(MAX_LENGTH * (max_k + 1), np.int64)
    codes = np.zeros(max_k + 1, np.int64)
    offsets = np.zeros(max_k + 1, np.int64)
    for k in range(1, max_k + 1):
        offsets[k] = word_offset(cap, k)
    flat = word_sums.reshape(-1)
    last_digit_counts = np.zeros(ROW_DIGITS, np.int64)
    for d in range(min(ROW_DIGITS, cap - 1)):
        last_digit_counts[d] = flat[3 * d]
    q = q_lo
    while q <= q_hi:
        members = 0
        pqs = 0
        if (not has_den) or den_ok[q] != 0:
            for p in range(1, q):
                if has_num and num_ok[p] == 0:
                    continue
                x = np.int64(q)
                y = np.int64(p)
                n = 0
                while y != 0:
                    a = x // y
                    r = x - a * y
                    digits[n] = a if a < cap else cap
                    n += 1
                    x = y
                    y = r
                if coprime_only and x != 1:
                    continue
                members += 1
                pqs += n
                length_hist[n] += 1
                for k in range(1, max_k + 1):
                    m = n - k + 1
                    if m <= 0:
                        break
                    position_sums[k, 0] += m
                    position_sums[k, 1] += m * m
                for j in range(n):
                    s = digits[j] - 1
                    top = max_k if j + 1 >= max_k else j + 1
                    for k in range(top, 0, -1):
                        code = codes[k - 1] * cap + s
                        codes[k] = code
                        idx = offsets[k] + code
                        rows[j * (max_k + 1) + k] = idx
                        c0 = scratch[idx]
                        scratch[idx] = c0 + 1
                        t = 3 * idx
                        flat[t] += 1
                        flat[t + 1] += 2 * c0 + 1
                        flat[t + 2] += n - k + 1
                for j in range(n):
                    top = max_k if j + 1 >= max_k else j + 1
                    for k in range(1, top + 1):
                        scratch[rows[j * (max_k + 1) + k]] = 0
        i = q - q_lo
        per_den[i, 0] = members
        per_den[i, 1] = pqs
        # Digit counts of this denominator from the change of the k = 1 counters: no per-digit branch.
        for d in range(ROW_DIGITS):
            if d < cap - 1:
                now = flat[3 * d]
                per_den[i, 2 + d] = now - last_digit_counts[d]
                last_digit_counts[d] = now
            else:
                per_den[i, 2 + d] = -1
        q += q_step


@serial
def reference_sweep_block_serial(q_lo, q_hi, num_ok, den_ok, coprime_only, cap, max_k):
    """Single-threaded sweep of one block; same outputs as :func:`sweep_block`."""
    n_words = n_word_rows(cap, max_k)
    word_sums = np.zeros((n_words, 3), np.int64)
    position_sums = np.zeros((max_k + 1, 2), np.int64)
    length_hist = np.zeros(MAX_LENGTH + 1, np.int64)
    per_den = np.zeros((q_hi - q_lo + 1, ROW_COLUMNS), np.int64)
    _reference_chunk(q_lo, q_hi, 1, num_ok, den_ok, coprime_only, cap, max_k,
                 word_sums, position_sums, length_hist, per_den)
    return word_sums, position_sums, length_hist, per_den


@parallel
def reference_sweep_block(q_lo, q_hi, num_ok, den_ok, coprime_only, cap, max_k, n_chunks):
    """Parallel sweep of one block over ``n_chunks`` per-thread buffers merged after the loop.

    Denominators are dealt to chunks cyclically (q_lo + c, q_lo + c + n_chunks, ...) because the work
    per denominator grows with q. The per-denominator rows are disjoint between chunks.
    """
    n_words = n_word_rows(cap, max_k)
    ws = np.zeros((n_chunks, n_words, 3), np.int64)
    ps = np.zeros((n_chunks, max_k + 1, 2), np.int64)
    lh = np.zeros((n_chunks, MAX_LENGTH + 1), np.int64)
    per_den = np.zeros((q_hi - q_lo + 1, ROW_COLUMNS), np.int64)
    for c in prange(n_chunks):
        if q_lo + c <= q_hi:
            _reference_chunk(q_lo + c, q_hi, n_chunks, num_ok, den_ok, coprime_only, cap, max_k,
                         ws[c], ps[c], lh[c], per_den[c:])
    word_sums = np.zeros((n_words, 3), np.int64)
    position_sums = np.zeros((max_k + 1, 2), np.int64)
    length_hist = np.zeros(MAX_LENGTH + 1, np.int64)
    for c in range(n_chunks):
        word_sums += ws[c]
        position_sums += ps[c]
        length_hist += lh[c]
    return word_sums, position_sums, length_hist, per_den
