"""The constructed stream: partial quotients of a family's members in order of q, then p, and word counts.

Stream. The family's members p/q (1 <= p < q) are visited in order of q, then p, and the shorter expansion
of each (Euclid on (q, p); non-reduced members give the digits of their reduced form) is appended. A
*cursor* (q, p, pos) says where the stream written so far ends: after the first ``pos`` partial quotients
of p/q (1 <= pos <= length of p/q). The cursor (1, 0, 0) is the empty stream. Resuming from a cursor
continues the stream exactly, so a stream of any length is produced in chunks of bounded memory.

Membership is given as in :mod:`cfsweep.kernels.sweep`: ``num_ok`` / ``den_ok`` uint8 arrays (empty =
every value admissible) and ``coprime_only``. The arrays are valid for q <= ``q_limit``; the kernel stops
before visiting a denominator above ``q_limit`` so that the caller can extend the arrays and resume.

Word counts (for prefix discrepancy). Every digit d is counted unpooled in ``digit_counts[d]`` (the caller
keeps the array longer than the largest denominator reached: a partial quotient of p/q is at most q).
A word of length k >= 2 is counted in a dense table over the *box* of digits 1..L_k: the word
(b1..bk) with all b_i <= L_k has code sum (b_i - 1) * L_k**(k-1-i) at row ``offsets[k] + code`` of
``word_counts``. Windows holding a digit above L_k are not counted per word; the caller bounds them with
the unpooled digit counts (see ``cfsweep.stream``). Windows are overlapping blocks of k consecutive
stream digits (they may straddle the boundary between two expansions: it is one number's digits).
"""
import numpy as np

from ._jit import serial
from .euclid import MAX_LENGTH

STATUS_FULL = 0
STATUS_LIMIT = 1


@serial
def _expand_into(q, p, buf, start):
    """Euclid on (q, p): digits to buf[start:]; return (length, gcd)."""
    x = np.int64(q)
    y = np.int64(p)
    n = 0
    while y != 0:
        a = x // y
        r = x - a * y
        buf[start + n] = a
        n += 1
        x = y
        y = r
    return n, x


@serial
def fill_stream(out, q, p, pos, q_limit, num_ok, den_ok, coprime_only):
    """Fill ``out`` with the stream continuing after cursor (q, p, pos).

    Returns (written, q, p, pos, status): ``written`` digits were stored in out[:written]; the new cursor
    is where they end; status is STATUS_FULL when ``out`` is full, STATUS_LIMIT when the next member
    would have a denominator above ``q_limit`` (then out[:written] is still valid and the cursor ends
    at the last member written, or is unchanged).
    Ranges: 1 <= q <= q_limit < 2**62, 0 <= p < q.
    """
    size = out.shape[0]
    has_num = num_ok.shape[0] > 0
    has_den = den_ok.shape[0] > 0
    buf = np.empty(MAX_LENGTH, np.int64)
    i = 0
    if pos > 0:
        n, g = _expand_into(q, p, buf, 0)
        while pos < n and i < size:
            out[i] = buf[pos]
            i += 1
            pos += 1
        if pos < n:
            return i, q, p, pos, STATUS_FULL
    # The cursor's fraction is complete: look for the next member.
    cq = np.int64(q)
    cp = np.int64(p)
    while i < size:
        cp += 1
        if cp >= cq:
            cq += 1
            cp = 1
            while cq <= q_limit and has_den and den_ok[cq] == 0:
                cq += 1
            if cq > q_limit:
                return i, q, p, pos, STATUS_LIMIT
        if has_num and num_ok[cp] == 0:
            continue
        if i + MAX_LENGTH <= size:
            # Room for any expansion: write in place and keep it only if p/q is a member.
            n, g = _expand_into(cq, cp, out, i)
            if coprime_only and g != 1:
                continue
            i += n
            q = cq
            p = cp
            pos = n
        else:
            n, g = _expand_into(cq, cp, buf, 0)
            if coprime_only and g != 1:
                continue
            q = cq
            p = cp
            pos = 0
            while pos < n and i < size:
                out[i] = buf[pos]
                i += 1
                pos += 1
    return i, q, p, pos, STATUS_FULL


@serial
def expansion_length_of(q, p):
    """Length of the shorter expansion of p/q (0 < p < q)."""
    buf = np.empty(MAX_LENGTH, np.int64)
    n, g = _expand_into(q, p, buf, 0)
    return n


@serial
def count_words(digits, digit_counts, word_counts, offsets, limits, max_k, codes, run_in_box, seen):
    """Add the digits (1-D int64, all >= 1) to the word counts, continuing the stream before them.

    State carried between calls (int64 arrays the caller keeps): ``codes[k]`` the code of the last k
    digits, ``run_in_box[k]`` how many of the last digits are <= limits[k], ``seen[0]`` digits so far.
    ``digit_counts`` must be longer than the largest digit. ``limits[k]`` (k >= 2) is L_k and
    ``offsets[k]`` the first row of length k in ``word_counts``.
    """
    modulus = np.ones(max_k + 1, np.int64)
    for k in range(2, max_k + 1):
        m = np.int64(1)
        for _ in range(k - 1):
            m *= limits[k]
        modulus[k] = m
    total = seen[0]
    for j in range(digits.shape[0]):
        d = digits[j]
        digit_counts[d] += 1
        total += 1
        for k in range(2, max_k + 1):
            lim = limits[k]
            if d <= lim:
                codes[k] = (codes[k] % modulus[k]) * lim + (d - 1)
                run_in_box[k] += 1
                if run_in_box[k] >= k:
                    word_counts[offsets[k] + codes[k]] += 1
            else:
                codes[k] = 0
                run_in_box[k] = 0
    seen[0] = total
