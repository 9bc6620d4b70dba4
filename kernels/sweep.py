"""One block of denominators: digit and word counts, lengths, per-denominator rows, error-bar sums.

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

How it is fast (see the design note on kernel speed). One Euclid chain is bound by the latency of the
divide, so LANES independent fractions advance in lockstep: a branch-free loop over lanes computes the
quotient by a float division (float32 while q < 2**24, float64 beyond) and corrects it with one exact
step, so every quotient is exact. Why one step suffices: x, y < 2**24 (2**53) are exact floats; the
correctly rounded x/y is monotone, so its floor is the true quotient or one more. With a one too big,
the true a*y >= x + 1, and x + 1 is representable, so the rounded a*y still exceeds x and the sign of
x - a*y is right; after stepping a down, a*y <= x is exact and so is r = x - a*y. Digit counts of the rational in each lane live in packed
per-lane counters (8-bit fields for symbols 0..7, 4-bit fields for 8..39: a symbol s >= 8 is a digit
>= 9, and 9**c <= q < 2**31 bounds its count c by 9), read once when the lane finishes. Words of
length >= 2 are read from a per-lane ring of symbols when the lane finishes. Lanes are refilled from
the next fraction as soon as they finish, so they flow across consecutive denominators. Caps above
PACKED_SYMBOLS fall back to the plain reference kernel (:mod:`sweep_reference`).

:func:`tally_pairs` tallies explicit fractions p/q with q < 2**63 (sampled runs): uint64 division
while the remainder is at least 2**53, float64 quotient with integer correction below.
"""
import numpy as np
from numba import prange

from ._jit import parallel, serial
from .euclid import MAX_LENGTH
from .sweep_reference import (ROW_COLUMNS, ROW_DIGITS, n_word_rows, reference_sweep_block,
                              reference_sweep_block_serial, word_offset)

__all__ = ["ROW_COLUMNS", "ROW_DIGITS", "LANES", "PACKED_SYMBOLS", "word_offset", "n_word_rows",
           "sweep_block", "sweep_block_serial", "tally_pairs", "tally_pairs_serial"]

LANES = 64
# Power of two above the longest expansion of any p/q with q < 2**31 (46 partial quotients).
RING = 64
RING_MASK = RING - 1
# Symbols held by the packed per-lane counters: 8 of 8 bits + 16 + 16 of 4 bits.
PACKED_SYMBOLS = 40
# Below this every integer is exact in float32; the quotient then needs at most one correction.
FLOAT32_EXACT = 2 ** 24
FLOAT64_EXACT = 2 ** 53

_U0 = np.uint64(0)
_U1 = np.uint64(1)
_U4 = np.uint64(4)
_U8 = np.uint64(8)
_U15 = np.uint64(15)
_U24 = np.uint64(24)
_U63 = np.uint64(63)
_U255 = np.uint64(255)
_U2_53 = np.uint64(FLOAT64_EXACT)


@serial
def _next_member(state, q_hi, q_step, num_ok, den_ok):
    """Advance ``state = [q, p]`` to the next admissible pair after it; False when none is left."""
    has_num = num_ok.shape[0] > 0
    has_den = den_ok.shape[0] > 0
    q = state[0]
    p = state[1] + 1
    while q <= q_hi:
        if (not has_den) or den_ok[q] != 0:
            if has_num:
                while p < q and num_ok[p] == 0:
                    p += 1
            if p < q:
                state[0] = q
                state[1] = p
                return True
        q += q_step
        p = 1
    state[0] = q
    state[1] = 0
    return False


@serial
def _record_words(ring, mask, lane, t_first, n, k_min, max_k, cap, offsets, codes, wtab, stamp):
    """Add the words of lengths k_min..max_k of one finished rational to ``wtab``.

    ``ring[(t_first + j) & mask, lane]`` is its j-th symbol. ``wtab`` rows hold, per word: sum c,
    sum of the prior count at each occurrence (so sum c**2 = sum c + 2 * that), sum m, and a scratch
    word ``stamp << 8 | count`` that makes a per-rational count without clearing anything.
    """
    for k in range(max_k + 1):
        codes[k] = 0
    for j in range(n):
        s = np.int64(ring[(t_first + j) & mask, lane])
        top = max_k if j + 1 >= max_k else j + 1
        for k in range(top, 0, -1):
            code = codes[k - 1] * cap + s
            codes[k] = code
            if k >= k_min:
                idx = offsets[k] + code
                v = wtab[idx, 3]
                before = (v & 255) if (v >> 8) == stamp else 0
                wtab[idx, 3] = (stamp << 8) | (before + 1)
                wtab[idx, 0] += 1
                wtab[idx, 1] += before
                wtab[idx, 2] += n - k + 1


@serial
def _words_to_sums(wtab, first_row, word_sums):
    for idx in range(first_row, word_sums.shape[0]):
        word_sums[idx, 0] += wtab[idx, 0]
        word_sums[idx, 1] += wtab[idx, 0] + 2 * wtab[idx, 1]
        word_sums[idx, 2] += wtab[idx, 2]


@serial
def _lane_chunk(q_first, q_hi, q_step, q_base, num_ok, den_ok, coprime_only, cap, max_k,
                int_proto, float_proto, word_sums, length_hist, per_den):
    """Lockstep sweep of q = q_first, q_first + q_step, ... <= q_hi (cap <= PACKED_SYMBOLS).

    Adds into ``word_sums`` and ``length_hist``; adds members, partial quotients and digit counts to
    ``per_den[q - q_base]``. ``int_proto``/``float_proto`` only choose the lane types (int32/float32
    for q_hi < 2**24, int64/float64 beyond).
    """
    xf = np.empty(LANES, float_proto.dtype)
    yf = np.empty(LANES, float_proto.dtype)
    quot = np.empty(LANES, float_proto.dtype)
    small = np.zeros(LANES, np.uint64)
    mid = np.zeros(LANES, np.uint64)
    high = np.zeros(LANES, np.uint64)
    t_first = np.zeros(LANES, np.int64)
    lane_q = np.zeros(LANES, np.int64)
    active = np.zeros(LANES, np.uint8)
    finished = np.empty(LANES, np.int64)
    ring = np.zeros((RING, LANES), np.uint8)
    # constants of the lane float type, so that no operation widens to float64
    consts = np.empty(3, float_proto.dtype)
    consts[0] = 0
    consts[1] = 1
    consts[2] = cap
    float_zero = consts[0]
    float_one = consts[1]
    cap_f = consts[2]

    # per length n, sum over rationals of the count of each symbol; per symbol, sum of count**2
    by_length = np.zeros((RING + 1, PACKED_SYMBOLS), np.int64)
    squares = np.zeros(PACKED_SYMBOLS, np.int64)
    words = max_k >= 2
    n_words = word_sums.shape[0]
    wtab = np.zeros((n_words if words else 1, 4), np.int64)
    offsets = np.zeros(max_k + 2, np.int64)
    for k in range(1, max_k + 2):
        offsets[k] = word_offset(cap, k)
    codes = np.zeros(max_k + 1, np.int64)
    stamp = np.int64(0)

    state = np.zeros(2, np.int64)
    state[0] = q_first
    n_active = 0
    for lane in range(LANES):
        if _next_member(state, q_hi, q_step, num_ok, den_ok):
            xf[lane] = state[0]
            yf[lane] = state[1]
            lane_q[lane] = state[0]
            active[lane] = 1
            n_active += 1
        else:
            xf[lane] = 2
            yf[lane] = 1

    t = np.int64(0)
    while n_active > 0:
        slot = t & RING_MASK
        # Phase 1: one Euclid step in every lane, branch-free so that LLVM vectorises it.
        for lane in range(LANES):
            xv = xf[lane]
            yv = yf[lane]
            a = np.floor(xv / yv)
            # a is the quotient or one too big; the sign test is exact (see the module docstring)
            a = a - float_one * (xv - a * yv < float_zero)
            quot[lane] = min(a, cap_f)
            xf[lane] = yv
            yf[lane] = xv - a * yv
        for lane in range(LANES):
            su = np.uint64(quot[lane]) - _U1
            ring[slot, lane] = su
            small[lane] += np.uint64(su < _U8) << ((su * _U8) & _U63)
            mid[lane] += np.uint64((su >= _U8) & (su < _U24)) << (((su - _U8) * _U4) & _U63)
            high[lane] += np.uint64(su >= _U24) << (((su - _U24) * _U4) & _U63)
        # Phase 2: indices of the lanes whose expansion just ended.
        n_done = 0
        for lane in range(LANES):
            finished[n_done] = lane
            n_done += yf[lane] == float_zero
        # Phase 3: book the finished rationals and refill their lanes.
        for j in range(n_done):
            lane = finished[j]
            if active[lane]:
                n = t - t_first[lane] + 1
                if (not coprime_only) or xf[lane] == float_one:
                    length_hist[n] += 1
                    v0 = small[lane]
                    row = lane_q[lane] - q_base
                    per_den[row, 0] += 1
                    per_den[row, 1] += n
                    for d in range(ROW_DIGITS):
                        per_den[row, 2 + d] += np.int64((v0 >> (np.uint64(d) * _U8)) & _U255)
                    for sym in range(8):
                        c = np.int64((v0 >> (np.uint64(sym) * _U8)) & _U255)
                        by_length[n, sym] += c
                        squares[sym] += c * c
                    if cap > 8:
                        v1 = mid[lane]
                        for sym in range(16):
                            c = np.int64((v1 >> (np.uint64(sym) * _U4)) & _U15)
                            by_length[n, 8 + sym] += c
                            squares[8 + sym] += c * c
                    if cap > 24:
                        v2 = high[lane]
                        for sym in range(16):
                            c = np.int64((v2 >> (np.uint64(sym) * _U4)) & _U15)
                            by_length[n, 24 + sym] += c
                            squares[24 + sym] += c * c
                    if words:
                        stamp += 1
                        _record_words(ring, RING_MASK, lane, t_first[lane], n, 2, max_k, cap,
                                      offsets, codes,
                                      wtab, stamp)
            small[lane] = _U0
            mid[lane] = _U0
            high[lane] = _U0
            t_first[lane] = t + 1
            if active[lane] and _next_member(state, q_hi, q_step, num_ok, den_ok):
                xf[lane] = state[0]
                yf[lane] = state[1]
                lane_q[lane] = state[0]
            else:
                if active[lane]:
                    active[lane] = 0
                    n_active -= 1
                xf[lane] = 2
                yf[lane] = 1
        t += 1

    for sym in range(cap):
        total = np.int64(0)
        weighted = np.int64(0)
        for n in range(1, RING + 1):
            total += by_length[n, sym]
            weighted += by_length[n, sym] * n
        word_sums[sym, 0] += total
        word_sums[sym, 1] += squares[sym]
        word_sums[sym, 2] += weighted
    if words:
        _words_to_sums(wtab, offsets[2], word_sums)


@serial
def _position_sums(length_hist, max_k):
    """Per word length k: sum over rationals of m = max(0, n - k + 1) and of m**2."""
    position_sums = np.zeros((max_k + 1, 2), np.int64)
    for n in range(length_hist.shape[0]):
        h = length_hist[n]
        for k in range(1, max_k + 1):
            m = n - k + 1
            if m > 0:
                position_sums[k, 0] += h * m
                position_sums[k, 1] += h * m * m
    return position_sums


@serial
def _mark_pooled_digits(per_den, cap):
    for d in range(ROW_DIGITS):
        if d >= cap - 1:
            for i in range(per_den.shape[0]):
                per_den[i, 2 + d] = -1


@serial
def _run_chunk(q_first, q_hi, q_step, q_base, num_ok, den_ok, coprime_only, cap, max_k,
               word_sums, length_hist, per_den):
    if q_hi < FLOAT32_EXACT:
        _lane_chunk(q_first, q_hi, q_step, q_base, num_ok, den_ok, coprime_only, cap, max_k,
                    np.zeros(1, np.int32), np.zeros(1, np.float32), word_sums, length_hist, per_den)
    else:
        _lane_chunk(q_first, q_hi, q_step, q_base, num_ok, den_ok, coprime_only, cap, max_k,
                    np.zeros(1, np.int64), np.zeros(1, np.float64), word_sums, length_hist, per_den)


@serial
def _lane_sweep_serial(q_lo, q_hi, num_ok, den_ok, coprime_only, cap, max_k):
    word_sums = np.zeros((n_word_rows(cap, max_k), 3), np.int64)
    length_hist = np.zeros(MAX_LENGTH + 1, np.int64)
    per_den = np.zeros((q_hi - q_lo + 1, ROW_COLUMNS), np.int64)
    _run_chunk(q_lo, q_hi, 1, q_lo, num_ok, den_ok, coprime_only, cap, max_k,
               word_sums, length_hist, per_den)
    _mark_pooled_digits(per_den, cap)
    return word_sums, _position_sums(length_hist, max_k), length_hist, per_den


def sweep_block_serial(q_lo, q_hi, num_ok, den_ok, coprime_only, cap, max_k):
    """Single-threaded sweep of one block; same outputs as :func:`sweep_block`."""
    if cap > PACKED_SYMBOLS:
        return reference_sweep_block_serial(q_lo, q_hi, num_ok, den_ok, coprime_only, cap, max_k)
    return _lane_sweep_serial(q_lo, q_hi, num_ok, den_ok, coprime_only, cap, max_k)


@parallel
def _lane_sweep_parallel(q_lo, q_hi, num_ok, den_ok, coprime_only, cap, max_k, n_chunks):
    n_words = n_word_rows(cap, max_k)
    ws = np.zeros((n_chunks, n_words, 3), np.int64)
    lh = np.zeros((n_chunks, MAX_LENGTH + 1), np.int64)
    per_den = np.zeros((q_hi - q_lo + 1, ROW_COLUMNS), np.int64)
    for c in prange(n_chunks):
        if q_lo + c <= q_hi:
            _run_chunk(q_lo + c, q_hi, n_chunks, q_lo, num_ok, den_ok, coprime_only, cap, max_k,
                       ws[c], lh[c], per_den)
    word_sums = np.zeros((n_words, 3), np.int64)
    length_hist = np.zeros(MAX_LENGTH + 1, np.int64)
    for c in range(n_chunks):
        word_sums += ws[c]
        length_hist += lh[c]
    _mark_pooled_digits(per_den, cap)
    return word_sums, _position_sums(length_hist, max_k), length_hist, per_den


def sweep_block(q_lo, q_hi, num_ok, den_ok, coprime_only, cap, max_k, n_chunks):
    """Parallel sweep of one block over ``n_chunks`` per-thread buffers merged after the loop.

    Denominators are dealt to chunks cyclically (q_lo + c, q_lo + c + n_chunks, ...) because the work
    per denominator grows with q. The per-denominator rows are disjoint between chunks. The integers
    returned do not depend on ``n_chunks`` or the thread count.
    """
    if cap > PACKED_SYMBOLS:
        return reference_sweep_block(q_lo, q_hi, num_ok, den_ok, coprime_only, cap, max_k, n_chunks)
    return _lane_sweep_parallel(q_lo, q_hi, num_ok, den_ok, coprime_only, cap, max_k, n_chunks)


@serial
def _tally_pairs_range(ps, qs, start, stop, cap, max_k, word_sums, length_hist):
    """Tally pairs start..stop-1 into ``word_sums`` and ``length_hist`` (exact for q < 2**63)."""
    ring = np.zeros((MAX_LENGTH, 1), np.uint8)
    n_words = word_sums.shape[0]
    wtab = np.zeros((n_words, 4), np.int64)
    offsets = np.zeros(max_k + 2, np.int64)
    for k in range(1, max_k + 2):
        offsets[k] = word_offset(cap, k)
    codes = np.zeros(max_k + 1, np.int64)
    cap_u = np.uint64(cap)
    for i in range(start, stop):
        x = np.uint64(qs[i])
        y = np.uint64(ps[i])
        n = 0
        # uint64 division while the operands are beyond float64's exact integers
        while y != _U0 and x >= _U2_53:
            a = x // y
            r = x - a * y
            s = (a if a < cap_u else cap_u) - _U1
            ring[n, 0] = np.uint8(s)
            n += 1
            x = y
            y = r
        xi = np.int64(x)
        yi = np.int64(y)
        while yi != 0:
            a = np.int64(np.floor(np.float64(xi) / np.float64(yi)))
            r = xi - a * yi
            if r < 0:
                a -= 1
                r += yi
            ring[n, 0] = np.uint8(min(a, cap) - 1)
            n += 1
            xi = yi
            yi = r
        length_hist[n] += 1
        _record_words(ring, MAX_LENGTH - 1, 0, 0, n, 1, max_k, cap, offsets, codes, wtab,
                      np.int64(i + 1))
    _words_to_sums(wtab, 0, word_sums)


@serial
def tally_pairs_serial(ps, qs, cap, max_k):
    """Single-threaded twin of :func:`tally_pairs`."""
    word_sums = np.zeros((n_word_rows(cap, max_k), 3), np.int64)
    length_hist = np.zeros(MAX_LENGTH + 1, np.int64)
    _tally_pairs_range(ps, qs, 0, ps.shape[0], cap, max_k, word_sums, length_hist)
    return word_sums, _position_sums(length_hist, max_k), length_hist


@parallel
def tally_pairs(ps, qs, cap, max_k, n_chunks):
    """Digit/word sums and lengths of explicit fractions p/q, split over ``n_chunks`` buffers.

    ``ps``, ``qs``: int64 or uint64 arrays with 0 < p < q < 2**63; pairs need not be reduced (a
    non-reduced pair gives the digits of its reduced form). Returns ``(word_sums, position_sums,
    length_hist)`` with the meaning of :func:`sweep_block`; the integers do not depend on n_chunks.
    """
    n_words = n_word_rows(cap, max_k)
    n_pairs = ps.shape[0]
    ws = np.zeros((n_chunks, n_words, 3), np.int64)
    lh = np.zeros((n_chunks, MAX_LENGTH + 1), np.int64)
    for c in prange(n_chunks):
        start = n_pairs * c // n_chunks
        stop = n_pairs * (c + 1) // n_chunks
        _tally_pairs_range(ps, qs, start, stop, cap, max_k, ws[c], lh[c])
    word_sums = np.zeros((n_words, 3), np.int64)
    length_hist = np.zeros(MAX_LENGTH + 1, np.int64)
    for c in range(n_chunks):
        word_sums += ws[c]
        length_hist += lh[c]
    return word_sums, _position_sums(length_hist, max_k), length_hist
