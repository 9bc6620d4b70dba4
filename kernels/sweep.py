"""One block of denominators: digit and word counts, lengths, per-denominator rows, error-bar sums.

Everything here is exact integer arithmetic. A block is the set of family members p/q with
q_lo <= q <= q_hi (2 <= q_lo <= q_hi < 2**31 for sweeps), visited q by q; the family is given as
membership arrays so that this module never needs to know about family grammar:

* ``num_ok[p]`` / ``den_ok[q]`` (uint8): 1 if p (q) is an admissible numerator (denominator);
  an empty array means "every value is admissible".
* ``coprime_only``: keep only gcd(p, q) = 1 (p sharing a prime factor with q is skipped before it is
  expanded; the gcd, the last remainder, is also checked when an expansion ends).

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

How it is fast (see the design note on kernel speed).

* Mirror: if p/q = [0; a1, a2, ..., an] with 2p < q (so a1 >= 2), then (q - p)/q = [0; 1, a1 - 1, a2,
  ..., an]. Only p < q/2 are expanded; each expansion books p/q and its mirror (each with weight 0/1:
  family membership is checked on p and on q - p separately; gcd(q - p, q) = gcd(p, q)). The mirror's
  digit counts differ at three symbols (+1 at digit 1, -1 at a1, +1 at a1 - 1), its length is n + 1
  and its words differ only at its first two positions. The middle fraction (q/2)/q = [0; 2] of even q
  is its own mirror and is booked on its own.
* The first quotient a1 = floor(q/p) is taken in float64 (exact for q < 2**52 after one correction)
  for a batch of GEN_BATCH fractions at a time, in a loop LLVM vectorises, and lanes are refilled
  from the batch, so lanes run from the second partial quotient on; p | q is booked at once.
* LANES independent fractions advance in lockstep: a branch-free loop over lanes computes the
  quotient by a float division (float32 while q < 2**24, float64 beyond) and corrects it with one exact
  step, so every quotient is exact. Why one step suffices: x, y < 2**24 (2**53) are exact floats; the
  correctly rounded x/y is monotone, so its floor is the true quotient or one more. With a one too big,
  the true a*y >= x + 1, and x + 1 is representable, so the rounded a*y still exceeds x and the sign of
  x - a*y is right; after stepping a down, a*y <= x is exact and so is r = x - a*y.
* Digit counts of the rational in each lane live in a packed per-lane counter (8-bit fields for
  symbols 0..7, the digits 1..8, about 85% of all digits); the rare symbols s >= 8 (digits >= 9) are
  a per-lane list instead, one 6-bit item pushed per rare digit (9**c <= q < 2**31 bounds their
  number by 9, see RARE_ITEM_BITS), which costs the per-step loop one shift and one select.
  Finished lanes (a uint64 bit mask, one bit per lane) are copied to a buffer (counter, list and one
  packed tag: weights, sym1, n, row) that is booked BUFFER at a time. The mirror's counters are p/q's
  plus a delta that depends on sym1 only (a table built per chunk). The sums of symbols 0..7 of both
  are int32 reductions over the buffer, symbol by symbol, which LLVM vectorises (exact: below 2**31
  per flush); a list's two newest items are booked without branches into a small table by item (in
  rotating copies, so that pairs without rare digits do not queue on one row), and only a third
  item (about one pair in ten) and the mirror's changes at rare symbols (a1 >= 9, whose counts the
  c**2 sums need are counted in the list by SWAR) take scalar branches; per-denominator sums stay in
  registers while the row stays the same.
  Each of these keeps consecutive pairs from waiting on each other's stores and keeps the count of
  scalar instructions per pair low, which is what bounds this kernel (see bench/).
* Words of length >= 2 are read from a per-lane ring of symbols when the lane finishes (no ring when
  max_k = 1); the per-word scratch ``stamp << 8 | count`` gives per-rational counts without clearing,
  and one packed cell per word holds sum c, the prior-count sum and sum m (see CELL_PRIOR_SHIFT). For
  max_k <= 3 the words p/q and its mirror share (all of p/q's from position 1 on) are booked once
  with both weights; only these enter the scratch, and the few words of one of the two read their
  prior counts from it without writing it.
* Inside the lane loop no function taking arrays is called per lane (the family generator and the
  word booking for max_k <= 3 are written out): each such call costs atomic reference-count updates.
* Lanes are refilled from the next fraction as soon as they finish, so they flow across consecutive
  denominators. Caps above PACKED_SYMBOLS fall back to the plain reference kernel
  (:mod:`sweep_reference`).

:func:`tally_pairs` tallies explicit fractions p/q with q < 2**63 (sampled runs): uint64 division
while the remainder is at least 2**53, float64 quotient with integer correction below.
"""
import numpy as np
from numba import prange
# LLVM's cttz; an internal but long-standing Numba intrinsic
from numba.cpython.unsafe.numbers import trailing_zeros

from ._jit import inline, parallel, serial
from .euclid import MAX_LENGTH
from .sweep_reference import (ROW_COLUMNS, ROW_DIGITS, n_word_rows, reference_sweep_block,
                              reference_sweep_block_serial, word_offset)

__all__ = ["ROW_COLUMNS", "ROW_DIGITS", "LANES", "PACKED_SYMBOLS", "word_offset", "n_word_rows",
           "sweep_block", "sweep_block_serial", "tally_pairs", "tally_pairs_serial"]

# One bit per lane in a uint64 mask of the lanes that finished in a step.
LANES = 64
# Power of two above the longest expansion of any p/q with q < 2**31 (46 partial quotients).
RING = 64
RING_MASK = RING - 1
# Symbols the lane kernel counts itself: 8 in the packed counter, the rest (items 1..32) in the rare
# lists; larger caps go to the plain reference kernel.
PACKED_SYMBOLS = 40
# Below this every integer is exact in float32; the quotient then needs at most one correction.
FLOAT32_EXACT = 2 ** 24
FLOAT64_EXACT = 2 ** 53

_U0 = np.uint64(0)
_U1 = np.uint64(1)
_U8 = np.uint64(8)
_U63 = np.uint64(63)
_U2_53 = np.uint64(FLOAT64_EXACT)


# columns of the word table of tally_pairs (one rational at a time, no mirror): sum c, sum of the prior
# count at each occurrence, sum m, and the scratch ``stamp << 8 | count``
TALLY_TOTAL, TALLY_PRIOR, TALLY_WEIGHTED, TALLY_SCRATCH = 0, 1, 2, 3
TALLY_COLUMNS = 4


@serial
def _record_words(ring, mask, lane, t_first, n, k_min, max_k, cap, offsets, codes, wtab, stamp):
    """Add the words of lengths k_min..max_k of one rational to ``wtab`` (used by tally_pairs).

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
                before = _shared_count(wtab[idx, TALLY_SCRATCH], stamp)
                wtab[idx, TALLY_SCRATCH] = (stamp << 8) | (before + 1)
                wtab[idx, TALLY_TOTAL] += 1
                wtab[idx, TALLY_PRIOR] += before
                wtab[idx, TALLY_WEIGHTED] += n - k + 1


@serial
def _shared_count(v, stamp):
    """The count of a word row in rational ``stamp`` from its scratch ``v`` (0 if another rational's)."""
    return (v & 255) if (v >> 8) == stamp else 0


@serial
def _scratch_step(v, stamp, delta):
    """One occurrence added (delta = +1), removed (-1) or neither (0) at a word row of rational ``stamp``.

    ``v`` is the row's scratch ``stamp << 8 | count``; returns the new scratch and what the row's cell
    gains in its sum c and prior-count fields (see CELL_PRIOR_SHIFT): the prior count of an added
    occurrence, minus that of a removed one.
    """
    count = _shared_count(v, stamp)
    now = count + delta
    return (stamp << 8) | now, delta + ((delta * min(count, now)) << CELL_PRIOR_SHIFT)


# A word row of the sweep's table ``wtab[row]`` is (cell, scratch). The cell packs sum c (bits 0..15),
# the sum of prior counts (bits 16..37: sum c**2 = sum c + 2 * that) and sum m (bits 38..) into one
# int64, cell = c + prior * 2**16 + m * 2**38, so that an occurrence costs one update of it. The
# packing is linear and each field is decoded as a signed number (c in [-2**15, 2**15), prior in
# [-2**21, 2**21)), so removals (k > 3: a rational's occurrence taken back, possibly after the cell
# was emptied) decode exactly too. Every update adds at most 2 to c (the weights of p/q and its
# mirror), and an occurrence's prior count and m are at most 46 (an expansion of q < 2**31 has at
# most 46 partial quotients, its mirror 47), so while |c| < 2**15 the prior field stays below
# 46 * 2**15 < 2**21: a cell whose c field reads CELL_SPILL_AT or more (negative c reads as more)
# is emptied into the int64 sums before the next update.
CELL_PRIOR_SHIFT = 16
CELL_M_SHIFT = 38
CELL_COUNT_MASK = (1 << CELL_PRIOR_SHIFT) - 1
CELL_SPILL_AT = (1 << (CELL_PRIOR_SHIFT - 1)) - 2
# columns of the sweep's word table: the cell, the scratch and the int64 sums cells are spilled into
# (a spill writes no other array: a kernel function that writes a second array behind a branch pays
# atomic reference-count updates of it on every call)
WORD_CELL, WORD_SCRATCH, WORD_TOTAL, WORD_SQUARES, WORD_WEIGHTED = 0, 1, 2, 3, 4
WORD_COLUMNS = 5
_COUNT_SIGN = 1 << (CELL_PRIOR_SHIFT - 1)
_PRIOR_BITS = CELL_M_SHIFT - CELL_PRIOR_SHIFT
_PRIOR_MASK = (1 << _PRIOR_BITS) - 1
_PRIOR_SIGN = 1 << (_PRIOR_BITS - 1)


@serial
def _cell_sums(cell):
    """Sum c, sum c**2 and sum c*m held in a packed cell (see CELL_PRIOR_SHIFT)."""
    total = ((cell & CELL_COUNT_MASK) ^ _COUNT_SIGN) - _COUNT_SIGN
    rest = (cell - total) >> CELL_PRIOR_SHIFT
    prior = ((rest & _PRIOR_MASK) ^ _PRIOR_SIGN) - _PRIOR_SIGN
    return total, total + 2 * prior, (rest - prior) >> _PRIOR_BITS


@inline
def _spill_cell(wtab, idx, cell):
    """Add a packed cell's sum c, sum c**2 and sum c*m to the int64 columns of word row ``idx``."""
    total, squares, weighted = _cell_sums(cell)
    wtab[idx, WORD_TOTAL] += total
    wtab[idx, WORD_SQUARES] += squares
    wtab[idx, WORD_WEIGHTED] += weighted


@serial
def _cells_to_sums(wtab, first_row, word_sums):
    """Add the sums of word rows ``first_row``.. of ``wtab`` (spilled and in the cells) to ``word_sums``."""
    for idx in range(first_row, word_sums.shape[0]):
        total, squares, weighted = _cell_sums(wtab[idx, WORD_CELL])
        word_sums[idx, 0] += wtab[idx, WORD_TOTAL] + total
        word_sums[idx, 1] += wtab[idx, WORD_SQUARES] + squares
        word_sums[idx, 2] += wtab[idx, WORD_WEIGHTED] + weighted


@serial
def _word_occurrence(wtab, idx, stamp, delta, m):
    """Add (delta = +1) or remove (delta = -1) one occurrence of word row ``idx`` in rational ``stamp``."""
    scratch, add = _scratch_step(wtab[idx, WORD_SCRATCH], stamp, delta)
    wtab[idx, WORD_SCRATCH] = scratch
    cell = wtab[idx, WORD_CELL] + add + ((delta * m) << CELL_M_SHIFT)
    # a removal may leave a negative count field, which reads as full and is spilled too
    if (cell & CELL_COUNT_MASK) >= CELL_SPILL_AT:
        _spill_cell(wtab, idx, cell)
        cell = 0
    wtab[idx, WORD_CELL] = cell


@serial
def _record_words_rolling(ring, lane, t_first, n, max_k, cap, offsets, codes, wtab, stamp, own,
                          mirror):
    """The occurrences part of :func:`_record_words_pair` for any max_k, with rolling word codes."""
    weight = own + mirror
    for k in range(max_k + 1):
        codes[k] = 0
    for j in range(n):
        s = np.int64(ring[(t_first + j) & RING_MASK, lane])
        top = max_k if j + 1 >= max_k else j + 1
        for k in range(top, 1, -1):
            code = codes[k - 1] * cap + s
            codes[k] = code
            idx = offsets[k] + code
            before = _shared_count(wtab[idx, WORD_SCRATCH], stamp)
            wtab[idx, WORD_SCRATCH] = (stamp << 8) | (before + 1)
            # the cell update written out: a call with array arguments per occurrence costs atomic
            # reference-count updates
            cell = (wtab[idx, WORD_CELL] + weight * (1 + (before << CELL_PRIOR_SHIFT)) +
                    ((own * (n - k + 1) + mirror * (n - k + 2)) << CELL_M_SHIFT))
            if (cell & CELL_COUNT_MASK) >= CELL_SPILL_AT:
                _spill_cell(wtab, idx, cell)
                cell = 0
            wtab[idx, WORD_CELL] = cell
        codes[1] = s


@serial
def _record_words_pair(ring, lane, t_first, n, max_k, cap, offsets, codes, wtab, stamp,
                       own, mirror, sym_mirror2):
    """Words of lengths 2..max_k of p/q (weight ``own``) and of its mirror (weight ``mirror``), for
    max_k > 3 (the lane loop books max_k <= 3 itself).

    The ring holds the symbols s_1..s_n of p/q (2p < q, so a1 >= 2); the mirror (q - p)/q has the
    symbols 0, ``sym_mirror2``, s_2, ..., s_n. Every occurrence of p/q except the words at its first
    position is also an occurrence in the mirror at one position later, whose m is one larger, so the
    mirror is booked as p/q's occurrences plus its two new first positions minus p/q's first ones.
    The scratch counts first hold p/q's counts, then the mirror's, so the prior-count sums of both
    are exact.
    """
    _record_words_rolling(ring, lane, t_first, n, max_k, cap, offsets, codes, wtab, stamp, own, mirror)
    if mirror == 0:
        return
    for k in range(2, max_k + 1):
        m_mirror = n + 2 - k
        if m_mirror <= 0:
            break
        if k <= n:
            # the mirror lacks p/q's word at position 0
            code = np.int64(0)
            for j in range(k):
                code = code * cap + np.int64(ring[(t_first + j) & RING_MASK, lane])
            _word_occurrence(wtab, offsets[k] + code, stamp, -1, m_mirror)
        # the mirror's word at position 0: 0, sym_mirror2, s_2, ..., s_(k-1)
        code = sym_mirror2
        for j in range(1, k - 1):
            code = code * cap + np.int64(ring[(t_first + j) & RING_MASK, lane])
        _word_occurrence(wtab, offsets[k] + code, stamp, 1, m_mirror)
        if m_mirror >= 2:
            # the mirror's word at position 1: sym_mirror2, s_2, ..., s_k
            code = sym_mirror2
            for j in range(1, k):
                code = code * cap + np.int64(ring[(t_first + j) & RING_MASK, lane])
            _word_occurrence(wtab, offsets[k] + code, stamp, 1, m_mirror)


@serial
def _words_to_sums(wtab, first_row, word_sums):
    """Add the sums of a tally_pairs word table (see TALLY_COLUMNS) to ``word_sums``."""
    for idx in range(first_row, word_sums.shape[0]):
        word_sums[idx, 0] += wtab[idx, TALLY_TOTAL]
        word_sums[idx, 1] += wtab[idx, TALLY_TOTAL] + 2 * wtab[idx, TALLY_PRIOR]
        word_sums[idx, 2] += wtab[idx, TALLY_WEIGHTED]


# A lane's rare symbols (s >= 8, the digits >= 9) are a list, not counters: each one drawn is pushed
# as the 6-bit item s - 7 (1..PACKED_SYMBOLS - 7), newest in the lowest bits. 9**c <= q < 2**31
# bounds their number by 9, so a list fits in 54 bits, and the empty fields above it read 0.
RARE_ITEM_BITS = 6
RARE_ITEM_OFFSET = 7
_U6 = np.uint64(RARE_ITEM_BITS)
_U7 = np.uint64(RARE_ITEM_OFFSET)
# one 1 in each of ten 6-bit fields, and the low five / the top bit of each
_ITEM_FIELDS_ONE = sum(1 << (RARE_ITEM_BITS * i) for i in range(10))
_ITEM_ONES = np.uint64(_ITEM_FIELDS_ONE)
_ITEM_LOW5 = np.uint64(31 * _ITEM_FIELDS_ONE)
_ITEM_TOP = np.uint64(32 * _ITEM_FIELDS_ONE)


@serial
def _rare_count(rare, sym):
    """How often symbol ``sym`` (8 <= sym < PACKED_SYMBOLS) is in the rare list ``rare`` (SWAR)."""
    x = rare ^ (np.uint64(sym - RARE_ITEM_OFFSET) * _ITEM_ONES)
    # bit 5 of a field is set iff the field is not 0 (the low five bits add without carry)
    nonzero = ((x & _ITEM_LOW5) + _ITEM_LOW5) | x
    zero_fields = (~nonzero & _ITEM_TOP) >> np.uint64(5)
    # the product sums the fields' bits into field 9 (at most 10: no carry)
    return np.int64(((zero_fields * _ITEM_ONES) >> np.uint64(54)) & _U63)


@serial
def _spread_low_bytes(v):
    """Bytes 0..3 of ``v`` as the four 16-bit fields of a uint64."""
    x = v & np.uint64(0xFFFFFFFF)
    x = (x | (x << np.uint64(16))) & np.uint64(0x0000FFFF0000FFFF)
    return (x | (x << _U8)) & np.uint64(0x00FF00FF00FF00FF)


@serial
def _mirror_row_deltas(cap):
    """Per first symbol sym1 (0..cap): what the mirror adds to p/q's per-denominator digits 1..4.

    In the four 16-bit fields of a wrapping uint64 (digit d + 1 in field d): +1 at symbol 0, -1 at
    sym1, +1 at sym2 = sym1 - 1, the last two only when sym1 < cap (a1 > cap: the mirror's a1 - 1 is
    pooled with a1).
    """
    deltas = np.zeros(PACKED_SYMBOLS + 1, np.uint64)
    for sym1 in range(1, cap + 1):
        delta = _U1
        if sym1 < cap:
            if sym1 < ROW_DIGITS:
                delta -= _U1 << (np.uint64(sym1) * np.uint64(16))
            if sym1 - 1 < ROW_DIGITS:
                delta += _U1 << (np.uint64(sym1 - 1) * np.uint64(16))
        deltas[sym1] = delta
    return deltas


# Copies of the length table, rotating per pair, so that consecutive pairs of the same length do not
# form a chain of read-modify-writes on one slot.
LENGTH_COPIES = 4
# Rows of a copy of the rare-symbol table (indexed by item; row 0 takes the empty items).
RARE_ROWS = 64
# Buffer rows (int64): packed counters of symbols 0..7 of p/q, its rare list and its tag (see
# _lane_chunk).
BUF_SMALL, BUF_RARE, BUF_TAG = 0, 1, 2
BUF_ROWS = 3
# Fields of a tag: own weight (bit 0), mirror weight (bit 1), sym1 (bits 2..7), n (bits 8..15),
# per-denominator row (bits 16..).
TAG_N_SHIFT = 8
TAG_ROW_SHIFT = 16


@serial
def _flush_finished(nb, buf, cap, row_deltas, work32, sym_sums, rare_tab, length_tab, per_den):
    """Book ``nb`` buffered finished pairs (p/q and its mirror) into the digit sums.

    ``buf[:, i]``: packed counters of symbols 0..7 of p/q, its rare list (see RARE_ITEM_BITS) and
    its tag (weights 0/1 of p/q and of the mirror, the symbol index sym1 of its first digit a1
    (``cap`` when a1 > cap), its length n, its per-denominator row). The mirror has length n + 1
    and p/q's counts, plus one at symbol 0, minus one at sym1 and plus one at sym2 = sym1 - 1 (the
    last two only when sym1 < cap). Symbols 0..7 of both are summed by loops over the buffer that
    LLVM vectorises; the scalar loop does the rest with few memory updates per pair (per-denominator
    sums in registers while the row stays the same; the two newest rare items of p/q booked without
    branches into ``rare_tab``, more items and the mirror's changes at rare symbols, a1 >= 9, behind
    branches). ``rare_tab[copy * RARE_ROWS + item]``: sum w * c, sum c * (w * n + mirror) and
    2 * sum w * (pairs of equal items), w = own + mirror, in LENGTH_COPIES rotating copies; see
    _fold_rare.
    """
    # int32 columns, so that the symbol loops run on 32-bit vector lanes: the byte counters of
    # symbols 0..3 and 4..7, masks -1/0 of the weights 1/0, weighted lengths, and the symbols where
    # the mirror has one less / one more (-1: none)
    lo = work32[0]
    hi = work32[1]
    w_own = work32[2]
    w_mirror = work32[3]
    n_own = work32[4]
    n_mirror = work32[5]
    less = work32[6]
    more = work32[7]
    for i in range(nb):
        tag = buf[BUF_TAG, i]
        own = tag & 1
        mirror = (tag >> 1) & 1
        sym1 = (tag >> 2) & 63
        n = (tag >> TAG_N_SHIFT) & 255
        v0 = buf[BUF_SMALL, i]
        lo[i] = np.int32(v0 & 0xFFFFFFFF)
        hi[i] = np.int32(v0 >> 32)
        w_own[i] = np.int32(-own)
        w_mirror[i] = np.int32(-mirror)
        n_own[i] = np.int32(own * n)
        n_mirror[i] = np.int32(mirror * (n + 1))
        pooled = sym1 == cap
        less[i] = np.int32(-1 if pooled else sym1)
        more[i] = np.int32(-1 if pooled else sym1 - 1)
    # int32 holds these per-flush sums exactly (at most 2 * BUFFER * 47 * 47 < 2**31), and integer
    # reductions may be reordered, so LLVM vectorises the loops over the buffer; symbol-outer order
    # makes each sum a plain reduction. Every product is cast back to int32: Numba types
    # int32 * int32 as int64, and the casts let LLVM keep 32-bit lanes.
    for sym in range(8):
        shift = np.int32(8 * (sym & 3))
        at_zero = np.int32(sym == 0)
        s32 = np.int32(sym)
        src = lo if sym < 4 else hi
        acc_total = np.int32(0)
        acc_weighted = np.int32(0)
        acc_squares = np.int32(0)
        for i in range(nb):
            c = np.int32((src[i] >> shift) & np.int32(255))
            cm = np.int32(c + at_zero - np.int32(less[i] == s32) + np.int32(more[i] == s32))
            c_own = np.int32(c & w_own[i])
            c_mirror = np.int32(cm & w_mirror[i])
            acc_total = np.int32(acc_total + np.int32(c_own + c_mirror))
            acc_weighted = np.int32(acc_weighted + np.int32(np.int32(c * n_own[i]) + np.int32(cm * n_mirror[i])))
            acc_squares = np.int32(acc_squares + np.int32(np.int32(c * c_own) + np.int32(cm * c_mirror)))
        sym_sums[0, sym] += np.int64(acc_total)
        sym_sums[1, sym] += np.int64(acc_weighted)
        sym_sums[2, sym] += np.int64(acc_squares)
    row_now = buf[BUF_TAG, 0] >> TAG_ROW_SHIFT if nb > 0 else 0
    # members in the low 32 bits, partial quotients in the high: at most 2 * BUFFER * 47 per flush;
    # digits 1..4 in 16-bit fields: at most 2 * BUFFER * 47 < 2**16 per flush (borrows of the
    # mirror's -1 cancel in the total)
    row_counts = np.int64(0)
    row_digits = _U0
    for i in range(nb):
        tag = buf[BUF_TAG, i]
        own = tag & 1
        mirror = (tag >> 1) & 1
        sym1 = (tag >> 2) & 63
        n = (tag >> TAG_N_SHIFT) & 255
        row = tag >> TAG_ROW_SHIFT
        if row != row_now:
            per_den[row_now, 0] += row_counts & 0xFFFFFFFF
            per_den[row_now, 1] += row_counts >> 32
            for d in range(ROW_DIGITS):
                per_den[row_now, 2 + d] += np.int64((row_digits >> np.uint64(16 * d)) & np.uint64(0xFFFF))
            row_counts = 0
            row_digits = _U0
            row_now = row
        w = own + mirror
        row_counts += w + ((w * n + mirror) << 32)
        v0 = np.uint64(buf[BUF_SMALL, i])
        row_digits += _spread_low_bytes(v0) * np.uint64(w) + (row_deltas[sym1] & (_U0 - np.uint64(mirror)))
        copy = (i & (LENGTH_COPIES - 1)) * RING
        length_tab[copy + n] += own
        length_tab[copy + n + 1] += mirror
        # rare symbols (>= 8): the items of p/q's list, for p/q and its mirror alike (w and
        # wn = w * n + mirror); c**2 = c + 2 * (pairs of equal items)
        rare = np.uint64(buf[BUF_RARE, i])
        wn = own * n + mirror * (n + 1)
        base = (i & (LENGTH_COPIES - 1)) * RARE_ROWS
        item_a = np.int64(rare & _U63)
        item_b = np.int64((rare >> _U6) & _U63)
        rare_tab[base + item_a, 0] += w
        rare_tab[base + item_a, 1] += wn
        rare_tab[base + item_b, 0] += w
        rare_tab[base + item_b, 1] += wn
        rare_tab[base + item_a, 2] += 2 * w * np.int64(item_a == item_b)
        rest = rare >> np.uint64(2 * RARE_ITEM_BITS)
        if rest != _U0:
            # a third item or more (about one pair in ten): each, and its pairs with the items
            # before it
            seen = rare & np.uint64((1 << (2 * RARE_ITEM_BITS)) - 1)
            while rest != _U0:
                item = np.int64(rest & _U63)
                rest >>= _U6
                rare_tab[base + item, 0] += w
                rare_tab[base + item, 1] += wn
                rare_tab[base + item, 2] += 2 * w * _rare_count(seen, item + RARE_ITEM_OFFSET)
                seen = (seen << _U6) | np.uint64(item)
        if sym1 >= 8 and sym1 < cap and mirror != 0:
            # the mirror has one sym1 less and one sym2 = sym1 - 1 more (p/q counts sym1 at least once)
            m = n + 1
            c1 = _rare_count(rare, sym1)
            sym_sums[0, sym1] -= 1
            sym_sums[1, sym1] -= m
            sym_sums[2, sym1] += 1 - 2 * c1
            sym2 = sym1 - 1
            if sym2 >= 8:
                c2 = _rare_count(rare, sym2)
                sym_sums[0, sym2] += 1
                sym_sums[1, sym2] += m
                sym_sums[2, sym2] += 2 * c2 + 1
    if nb > 0:
        per_den[row_now, 0] += row_counts & 0xFFFFFFFF
        per_den[row_now, 1] += row_counts >> 32
        for d in range(ROW_DIGITS):
            per_den[row_now, 2 + d] += np.int64((row_digits >> np.uint64(16 * d)) & np.uint64(0xFFFF))


@serial
def _fold_rare(rare_tab, sym_sums):
    """Add the rare-symbol table's sums (all copies; item = symbol - 7) to ``sym_sums``."""
    for copy in range(LENGTH_COPIES):
        for sym in range(8, PACKED_SYMBOLS):
            row = copy * RARE_ROWS + sym - RARE_ITEM_OFFSET
            sym_sums[0, sym] += rare_tab[row, 0]
            sym_sums[1, sym] += rare_tab[row, 1]
            sym_sums[2, sym] += rare_tab[row, 0] + rare_tab[row, 2]


BUFFER = 512
@serial
def _distinct_prime_factors(m, out):
    """Write the distinct prime factors of ``m`` (1 <= m < 2**62) into ``out``; return how many.

    Trial division up to sqrt(m): at most 23,170 divisions for m < 2**31, once per denominator, while
    the sweep expands m/2 fractions of that denominator.
    """
    count = 0
    if m % 2 == 0:
        out[count] = 2
        count += 1
        while m % 2 == 0:
            m //= 2
    d = np.int64(3)
    while d * d <= m:
        if m % d == 0:
            out[count] = d
            count += 1
            while m % d == 0:
                m //= d
        d += 2
    if m > 1:
        out[count] = m
        count += 1
    return count


# Fractions generated per batch of first quotients (rows of ``gen`` in _lane_chunk).
GEN_BATCH = 256
GEN_P, GEN_Q, GEN_R, GEN_TAG, GEN_SMALL, GEN_RARE = 0, 1, 2, 3, 4, 5
GEN_ROWS = 6


GEN_STATE_P, GEN_STATE_Q, GEN_MORE, GEN_FACTORS_OF, GEN_N_FACTORS, GEN_WINDOW, GEN_MASK = 0, 1, 2, 3, 4, 5, 6


@serial
def _first_quotients(gen, g_len, q_base, cap):
    """First quotient a1 = floor(q/p), remainder, tag bits, counter and rare list of the batch's
    fractions."""
    # branch-free so that LLVM vectorises it; floor(q/p) in float64 is exact for q < 2**52 after one
    # correction either way
    for i in range(g_len):
        p = gen[GEN_P, i]
        q = gen[GEN_Q, i]
        a1 = np.int64(np.float64(q) / np.float64(p))
        r = q - a1 * p
        low = np.int64(r < 0)
        a1 -= low
        r += low * p
        high_r = np.int64(r >= p)
        a1 += high_r
        r -= high_r * p
        sym1 = min(a1, cap + 1) - 1
        s_counted = min(sym1, cap - 1)
        su = np.uint64(s_counted)
        gen[GEN_R, i] = r
        gen[GEN_TAG, i] |= (sym1 << 2) | ((q - q_base) << TAG_ROW_SHIFT)
        gen[GEN_SMALL, i] = np.int64(np.uint64(su < _U8) << ((su * _U8) & _U63))
        gen[GEN_RARE, i] = np.int64((su - _U7) & (_U0 - np.uint64(su >= _U8)))


@serial
def _next_batch(gen, state, factors, patterns, q_hi, q_step, q_base, num_ok, den_ok, coprime_only, cap):
    """Fill ``gen`` with the next fractions of the chunk and their first quotients; returns how many.

    ``state``: the generator (p, q, whether q <= q_hi, the q whose prime factors are in ``factors``,
    how many, and the window of 64 numerators starting at ``state[GEN_WINDOW]`` whose bit mask marks
    those sharing a prime factor with q). ``patterns[k]``: bits 0, r, 2r, ... below 64 of the k-th
    prime factor r. Called once per batch of GEN_BATCH fractions.
    """
    has_num = num_ok.shape[0] > 0
    has_den = den_ok.shape[0] > 0
    gen_p = state[GEN_STATE_P]
    gen_q = state[GEN_STATE_Q]
    more = state[GEN_MORE] != 0
    factors_of = state[GEN_FACTORS_OF]
    n_factors = state[GEN_N_FACTORS]
    window = state[GEN_WINDOW]
    mask = np.uint64(state[GEN_MASK])
    # next batch of p with 2p < q where p/q (flags bit 0) or its mirror (bit 1) is a
    # member; the middle fraction p = q/2 is booked after the loop
    g_len = 0
    while more and g_len < GEN_BATCH:
        gen_p += 1
        if 2 * gen_p >= gen_q or (has_den and den_ok[gen_q] == 0):
            gen_q += q_step
            gen_p = 0
            more = gen_q <= q_hi
            continue
        # a candidate is written at g_len in any case and kept by counting it:
        # whether it is kept is data, and a branch on it would be mispredicted often
        keep = True
        if coprime_only:
            # skip p sharing a prime factor with q before expanding it, from a bit mask of the
            # multiples of q's prime factors in a window of 64 numerators, made once per window
            if factors_of != gen_q:
                n_factors = _distinct_prime_factors(gen_q, factors)
                for k in range(n_factors):
                    pattern = _U0
                    for position in range(0, 64, factors[k]):
                        pattern |= _U1 << np.uint64(position)
                    patterns[k] = np.int64(pattern)
                factors_of = gen_q
                window = gen_p - 64  # forces a new window below
            if gen_p - window >= 64:
                window = gen_p
                mask = _U0
                for k in range(n_factors):
                    r = factors[k]
                    first = (r - window % r) % r  # the first multiple of r at or after window
                    if first < 64:
                        mask |= np.uint64(patterns[k]) << np.uint64(first)
            keep &= ((mask >> np.uint64(gen_p - window)) & _U1) == _U0
        if has_num:
            flags = np.int64(num_ok[gen_p] != 0) | (np.int64(num_ok[gen_q - gen_p] != 0) << 1)
            keep &= flags != 0
        else:
            flags = np.int64(3)
        gen[GEN_P, g_len] = gen_p
        gen[GEN_Q, g_len] = gen_q
        gen[GEN_TAG, g_len] = flags
        g_len += np.int64(keep)
    _first_quotients(gen, g_len, q_base, cap)
    state[GEN_STATE_P] = gen_p
    state[GEN_STATE_Q] = gen_q
    state[GEN_MORE] = np.int64(more)
    state[GEN_FACTORS_OF] = factors_of
    state[GEN_N_FACTORS] = n_factors
    state[GEN_WINDOW] = window
    state[GEN_MASK] = np.int64(mask)
    return g_len


@serial
def _lane_chunk(q_first, q_hi, q_step, q_base, num_ok, den_ok, coprime_only, cap, max_k,
                int_proto, float_proto, word_sums, length_hist, per_den):
    """Lockstep sweep of q = q_first, q_first + q_step, ... <= q_hi (cap <= PACKED_SYMBOLS).

    Only p with 2p < q are expanded (see the module docstring: the mirror (q - p)/q is booked from
    the same expansion); their first quotient is taken in scalar code when a lane is refilled, so the
    lanes run from the second partial quotient on. Adds into ``word_sums`` and ``length_hist``; adds
    members, partial quotients and digit counts to ``per_den[q - q_base]``. ``int_proto``/
    ``float_proto`` only choose the lane types (float32 for q_hi < 2**24, float64 beyond).
    """
    xf = np.empty(LANES, float_proto.dtype)
    yf = np.empty(LANES, float_proto.dtype)
    quot = np.empty(LANES, float_proto.dtype)
    small = np.zeros(LANES, np.uint64)
    rare = np.zeros(LANES, np.uint64)
    t_first = np.zeros(LANES, np.int64)
    # own | mirror << 1 | sym1 << 2 | row << TAG_ROW_SHIFT of the pair in each lane
    lane_tag = np.zeros(LANES, np.int64)
    active = np.zeros(LANES, np.uint8)
    words = max_k >= 2
    ring = np.zeros((RING if words else 1, LANES), np.uint8)
    # constants of the lane float type, so that no operation widens to float64
    consts = np.empty(3, float_proto.dtype)
    consts[0] = 0
    consts[1] = 1
    consts[2] = cap
    float_zero = consts[0]
    float_one = consts[1]
    cap_f = consts[2]

    buf = np.zeros((BUF_ROWS, BUFFER), np.int64)
    work32 = np.zeros((8, BUFFER), np.int32)
    nb = 0
    gen = np.zeros((GEN_ROWS, GEN_BATCH), np.int64)
    # coprime_only: the distinct prime factors of the q being generated (at most 9 for q < 2**31)
    factors = np.zeros(16, np.int64)
    patterns = np.zeros(16, np.int64)
    g_len = 0
    g_next = 0
    sym_sums = np.zeros((3, PACKED_SYMBOLS), np.int64)
    rare_tab = np.zeros((LENGTH_COPIES * RARE_ROWS, 3), np.int64)
    row_deltas = _mirror_row_deltas(cap)
    length_tab = np.zeros(LENGTH_COPIES * RING, np.int64)

    n_words = word_sums.shape[0]
    wtab = np.zeros((n_words if words else 1, WORD_COLUMNS), np.int64)
    offsets = np.zeros(max_k + 2, np.int64)
    for k in range(1, max_k + 2):
        offsets[k] = word_offset(cap, k)
    codes = np.zeros(max_k + 1, np.int64)
    stamp = np.int64(0)

    row2 = offsets[2] if max_k >= 2 else 0
    row3 = offsets[3] if max_k >= 3 else 0

    has_num = num_ok.shape[0] > 0
    has_den = den_ok.shape[0] > 0
    gen_state = np.zeros(7, np.int64)
    gen_state[GEN_STATE_Q] = q_first
    gen_state[GEN_MORE] = q_first <= q_hi
    gen_state[GEN_FACTORS_OF] = -1
    n_active = 0
    t = np.int64(-1)
    # lane refills happen at the end of step t; the first fill is "step -1"
    ended = ~_U0
    while True:
        # Phase 3 (and the first fill): book finished lanes, refill them from the next fractions.
        while ended != _U0:
            lane = np.int64(trailing_zeros(ended))
            ended &= ended - _U1
            if active[lane]:
                if (not coprime_only) or xf[lane] == float_one:
                    if nb == BUFFER:
                        _flush_finished(nb, buf, cap, row_deltas, work32, sym_sums, rare_tab, length_tab,
                                        per_den)
                        nb = 0
                    n = t - t_first[lane] + 1
                    tag = lane_tag[lane]
                    buf[BUF_SMALL, nb] = np.int64(small[lane])
                    buf[BUF_RARE, nb] = np.int64(rare[lane])
                    buf[BUF_TAG, nb] = tag | (n << TAG_N_SHIFT)
                    nb += 1
                    if words:
                        stamp += 1
                        own = tag & 1
                        mirror = (tag >> 1) & 1
                        sym1 = (tag >> 2) & 63
                        sym_mirror2 = cap - 1 if sym1 == cap else sym1 - 1
                        tf = t_first[lane]
                        if max_k <= 3:
                            # _record_words_pair's result for max_k <= 3, written out (a call with
                            # array arguments costs atomic reference-count updates per finished
                            # lane) and cheaper: p/q's symbols t_0..t_(n-1) (n >= 2 in a lane) and
                            # the mirror's 0, m2, t_1, ..., t_(n-1) share every word of p/q from
                            # position 1 on, booked once with weight own + mirror; the scratch
                            # counts hold only these, so p/q's word at position 0 and the mirror's
                            # words at positions 0 and 1 read their prior counts from it without
                            # changing it (the mirror's two words may be the same word)
                            weight = own + mirror
                            # cells (see CELL_PRIOR_SHIFT) gain weight occurrences of m = n - k + 1
                            # (p/q) and n - k + 2 (mirror) and weight times the prior count
                            add2 = weight + ((own * (n - 1) + mirror * n) << CELL_M_SHIFT)
                            add3 = weight + ((own * (n - 2) + mirror * (n - 1)) << CELL_M_SHIFT)
                            cap_u = np.uint64(cap)
                            row2_u = np.uint64(row2)
                            row3_u = np.uint64(row3)
                            t_0 = np.uint64(ring[tf & RING_MASK, lane])
                            t_1 = np.uint64(ring[(tf + 1) & RING_MASK, lane])
                            t_2 = np.uint64(ring[(tf + 2) & RING_MASK, lane])
                            prev1 = t_1
                            prev2 = t_0 * cap_u + t_1
                            # unsigned indices: no negative-index wraparound test per update
                            if max_k == 2:
                                for j in range(2, n):
                                    s = np.uint64(ring[(tf + j) & RING_MASK, lane])
                                    idx = row2_u + prev1 * cap_u + s
                                    before = _shared_count(wtab[idx, WORD_SCRATCH], stamp)
                                    wtab[idx, WORD_SCRATCH] = (stamp << 8) | (before + 1)
                                    cell = wtab[idx, WORD_CELL] + add2 + ((weight * before) << CELL_PRIOR_SHIFT)
                                    if (cell & CELL_COUNT_MASK) >= CELL_SPILL_AT:
                                        _spill_cell(wtab, idx, cell)
                                        cell = 0
                                    wtab[idx, WORD_CELL] = cell
                                    prev1 = s
                            else:
                                for j in range(2, n):
                                    s = np.uint64(ring[(tf + j) & RING_MASK, lane])
                                    code2 = prev1 * cap_u + s
                                    idx = row2_u + code2
                                    before = _shared_count(wtab[idx, WORD_SCRATCH], stamp)
                                    wtab[idx, WORD_SCRATCH] = (stamp << 8) | (before + 1)
                                    cell = wtab[idx, WORD_CELL] + add2 + ((weight * before) << CELL_PRIOR_SHIFT)
                                    if (cell & CELL_COUNT_MASK) >= CELL_SPILL_AT:
                                        _spill_cell(wtab, idx, cell)
                                        cell = 0
                                    wtab[idx, WORD_CELL] = cell
                                    if j >= 3:
                                        idx = row3_u + prev2 * cap_u + s
                                        before = _shared_count(wtab[idx, WORD_SCRATCH], stamp)
                                        wtab[idx, WORD_SCRATCH] = (stamp << 8) | (before + 1)
                                        cell = wtab[idx, WORD_CELL] + add3 + ((weight * before) << CELL_PRIOR_SHIFT)
                                        if (cell & CELL_COUNT_MASK) >= CELL_SPILL_AT:
                                            _spill_cell(wtab, idx, cell)
                                            cell = 0
                                        wtab[idx, WORD_CELL] = cell
                                    prev2 = code2
                                    prev1 = s
                            if own != 0:
                                # p/q's words at position 0
                                idx = row2_u + t_0 * cap_u + t_1
                                cell = (wtab[idx, WORD_CELL] + 1 + ((_shared_count(wtab[idx, WORD_SCRATCH], stamp)) << CELL_PRIOR_SHIFT) +
                                        ((n - 1) << CELL_M_SHIFT))
                                if (cell & CELL_COUNT_MASK) >= CELL_SPILL_AT:
                                    _spill_cell(wtab, idx, cell)
                                    cell = 0
                                wtab[idx, WORD_CELL] = cell
                                if max_k == 3 and n >= 3:
                                    idx = row3_u + (t_0 * cap_u + t_1) * cap_u + t_2
                                    cell = (wtab[idx, WORD_CELL] + 1 + ((_shared_count(wtab[idx, WORD_SCRATCH], stamp)) << CELL_PRIOR_SHIFT) +
                                            ((n - 2) << CELL_M_SHIFT))
                                    if (cell & CELL_COUNT_MASK) >= CELL_SPILL_AT:
                                        _spill_cell(wtab, idx, cell)
                                        cell = 0
                                    wtab[idx, WORD_CELL] = cell
                            if mirror != 0:
                                # the mirror's words at positions 0 and 1: (0, m2), (m2, t_1) and
                                # (0, m2, t_1), (m2, t_1, t_2)
                                m2 = np.uint64(sym_mirror2)
                                first = row2_u + m2
                                second = row2_u + m2 * cap_u + t_1
                                cell = (wtab[first, WORD_CELL] + 1 + ((_shared_count(wtab[first, WORD_SCRATCH], stamp)) << CELL_PRIOR_SHIFT) +
                                        ((n) << CELL_M_SHIFT))
                                if (cell & CELL_COUNT_MASK) >= CELL_SPILL_AT:
                                    _spill_cell(wtab, first, cell)
                                    cell = 0
                                wtab[first, WORD_CELL] = cell
                                prior = _shared_count(wtab[second, WORD_SCRATCH], stamp) + np.int64(first == second)
                                cell = (wtab[second, WORD_CELL] + 1 + ((prior) << CELL_PRIOR_SHIFT) +
                                        ((n) << CELL_M_SHIFT))
                                if (cell & CELL_COUNT_MASK) >= CELL_SPILL_AT:
                                    _spill_cell(wtab, second, cell)
                                    cell = 0
                                wtab[second, WORD_CELL] = cell
                                if max_k == 3:
                                    first = row3_u + m2 * cap_u + t_1
                                    cell = (wtab[first, WORD_CELL] + 1 + ((_shared_count(wtab[first, WORD_SCRATCH], stamp)) << CELL_PRIOR_SHIFT) +
                                            ((n - 1) << CELL_M_SHIFT))
                                    if (cell & CELL_COUNT_MASK) >= CELL_SPILL_AT:
                                        _spill_cell(wtab, first, cell)
                                        cell = 0
                                    wtab[first, WORD_CELL] = cell
                                    if n >= 3:
                                        second = row3_u + (m2 * cap_u + t_1) * cap_u + t_2
                                        prior = (_shared_count(wtab[second, WORD_SCRATCH], stamp) +
                                                 np.int64(first == second))
                                        cell = (wtab[second, WORD_CELL] + 1 + ((prior) << CELL_PRIOR_SHIFT) +
                                                ((n - 1) << CELL_M_SHIFT))
                                        if (cell & CELL_COUNT_MASK) >= CELL_SPILL_AT:
                                            _spill_cell(wtab, second, cell)
                                            cell = 0
                                        wtab[second, WORD_CELL] = cell
                        else:
                            _record_words_pair(ring, lane, tf, n, max_k, cap, offsets, codes, wtab,
                                               stamp, own, mirror, sym_mirror2)
                active[lane] = 0
                n_active -= 1
            got = False
            while True:
                if g_next == g_len:
                    if gen_state[GEN_MORE] == 0:
                        break
                    g_len = _next_batch(gen, gen_state, factors, patterns, q_hi, q_step, q_base, num_ok,
                                        den_ok, coprime_only, cap)
                    g_next = 0
                    continue
                i = g_next
                g_next += 1
                p = gen[GEN_P, i]
                tag = gen[GEN_TAG, i]
                if gen[GEN_R, i] == 0:
                    # p divides q: the expansion is [a1]; gcd(p, q) = p
                    if (not coprime_only) or p == 1:
                        if nb == BUFFER:
                            _flush_finished(nb, buf, cap, row_deltas, work32, sym_sums, rare_tab,
                                            length_tab, per_den)
                            nb = 0
                        buf[BUF_SMALL, nb] = gen[GEN_SMALL, i]
                        buf[BUF_RARE, nb] = gen[GEN_RARE, i]
                        buf[BUF_TAG, nb] = tag | (1 << TAG_N_SHIFT)
                        nb += 1
                        mirror = (tag >> 1) & 1
                        if words and mirror != 0:
                            # the mirror [1, a1 - 1] has the single word of length 2 (0, s)
                            sym1 = (tag >> 2) & 63
                            s2 = cap - 1 if sym1 == cap else sym1 - 1
                            idx = offsets[2] + s2
                            # a rational of its own: a new stamp, so its prior count is 0
                            stamp += 1
                            _word_occurrence(wtab, idx, stamp, 1, 1)
                    continue
                xf[lane] = p
                yf[lane] = gen[GEN_R, i]
                small[lane] = np.uint64(gen[GEN_SMALL, i])
                rare[lane] = np.uint64(gen[GEN_RARE, i])
                lane_tag[lane] = tag
                t_first[lane] = t
                if words:
                    sym1 = (tag >> 2) & 63
                    ring[t & RING_MASK, lane] = np.uint8(min(sym1, cap - 1))
                active[lane] = 1
                n_active += 1
                got = True
                break
            if not got:
                xf[lane] = 2
                yf[lane] = 1
                small[lane] = _U0
                rare[lane] = _U0
        if n_active == 0:
            break
        t += 1
        slot = t & RING_MASK
        # Phase 1: one Euclid step in every lane, branch-free so that LLVM vectorises it.
        for lane in range(LANES):
            xv = xf[lane]
            yv = yf[lane]
            a = np.floor(xv / yv)
            # a is the quotient or one too big; the sign test is exact (see the module docstring)
            a = a - float_one * (xv - a * yv < float_zero)
            digit = min(a, cap_f)
            quot[lane] = digit
            xf[lane] = yv
            yf[lane] = xv - a * yv
        if words:
            for lane in range(LANES):
                ring[slot, lane] = np.uint8(quot[lane]) - np.uint8(1)
        if cap > 8:
            for lane in range(LANES):
                su = np.uint64(np.int32(quot[lane]) - np.int32(1))
                small[lane] += np.uint64(su < _U8) << ((su * _U8) & _U63)
                listed = rare[lane]
                rare[lane] = ((listed << _U6) | (su - _U7)) if su >= _U8 else listed
        else:
            for lane in range(LANES):
                su = np.uint64(np.int32(quot[lane]) - np.int32(1))
                small[lane] += _U1 << ((su * _U8) & _U63)
        # Phase 2: bit mask of the lanes whose expansion just ended (an OR reduction LLVM vectorises).
        ended = _U0
        for lane in range(LANES):
            ended |= np.uint64(yf[lane] == float_zero) << np.uint64(lane)

    _flush_finished(nb, buf, cap, row_deltas, work32, sym_sums, rare_tab, length_tab, per_den)
    _fold_rare(rare_tab, sym_sums)
    for copy in range(LENGTH_COPIES):
        for n in range(RING):
            length_hist[n] += length_tab[copy * RING + n]
    # the middle fraction (q/2)/q = [0; 2] of even q is its own mirror; gcd = q/2
    for q in range(q_first, q_hi + 1, q_step):
        if q % 2 == 0 and ((not has_den) or den_ok[q] != 0) and ((not has_num) or num_ok[q // 2] != 0) \
                and ((not coprime_only) or q == 2):
            length_hist[1] += 1
            sym_sums[0, 1] += 1
            sym_sums[1, 1] += 1
            sym_sums[2, 1] += 1
            row = q - q_base
            per_den[row, 0] += 1
            per_den[row, 1] += 1
            per_den[row, 3] += 1
    for sym in range(cap):
        word_sums[sym, 0] += sym_sums[0, sym]
        word_sums[sym, 1] += sym_sums[2, sym]
        word_sums[sym, 2] += sym_sums[1, sym]
    if words:
        _cells_to_sums(wtab, offsets[2], word_sums)


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
    per denominator grows with q; a thread takes a run of consecutive chunks, so several chunks per
    thread give every thread denominators of every residue class (even q have far fewer members in
    coprime or square-free families). The per-denominator rows are disjoint between chunks. The integers
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
    wtab = np.zeros((n_words, TALLY_COLUMNS), np.int64)
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
