"""The lockstep sweep kernel against the plain reference kernel and plain-Python Fraction expansions."""
from fractions import Fraction
from math import gcd

import numba
import numpy as np
import pytest
import sympy
from hypothesis import given, settings, strategies as st

from cfsweep.kernels import sweep, sweep_reference as ref
from cfsweep.kernels.euclid import MAX_LENGTH

EMPTY = np.zeros(0, np.uint8)


def fraction_digits(p, q):
    """Partial quotients of the shorter expansion of p/q by the floor/reciprocal definition."""
    x = Fraction(p, q)
    digits = []
    while x != 0:
        x = 1 / x
        a = x.numerator // x.denominator
        digits.append(a)
        x -= a
    return digits


def python_sums(pairs, cap, max_k):
    """word_sums, position_sums, length_hist of the given pairs from their Fraction expansions."""
    return sums_from_expansions([fraction_digits(p, q) for p, q in pairs], cap, max_k)


def sums_from_expansions(expansions, cap, max_k):
    """The kernel's outputs computed in plain Python from lists of partial quotients."""
    offsets = [0, 0] + [sum(cap ** j for j in range(1, k)) for k in range(2, max_k + 2)]
    word_sums = np.zeros((offsets[max_k + 1], 3), np.int64)
    position_sums = np.zeros((max_k + 1, 2), np.int64)
    length_hist = np.zeros(MAX_LENGTH + 1, np.int64)
    for digits in expansions:
        syms = [min(a, cap) - 1 for a in digits]
        n = len(syms)
        length_hist[n] += 1
        for k in range(1, max_k + 1):
            m = max(0, n - k + 1)
            position_sums[k] += (m, m * m)
            counts = {}
            for j in range(m):
                code = 0
                for s in syms[j:j + k]:
                    code = code * cap + s
                counts[code] = counts.get(code, 0) + 1
            for code, c in counts.items():
                word_sums[offsets[k] + code] += (c, c * c, c * m)
    return word_sums, position_sums, length_hist


def members(q_lo, q_hi, num_ok, den_ok, coprime_only):
    for q in range(q_lo, q_hi + 1):
        if den_ok.size and not den_ok[q]:
            continue
        for p in range(1, q):
            if num_ok.size and not num_ok[p]:
                continue
            if coprime_only and gcd(p, q) != 1:
                continue
            yield p, q


def sympy_class(kind, n):
    """Membership array 0..n built with sympy (independent of the project's sieves)."""
    out = np.zeros(n + 1, np.uint8)
    for m in range(1, n + 1):
        if kind == "prime":
            out[m] = sympy.isprime(m)
        elif kind == "squarefree":
            out[m] = all(e == 1 for e in sympy.factorint(m).values())
    return out


def assert_same(a, b):
    assert len(a) == len(b)
    for x, y in zip(a, b):
        assert x.dtype == y.dtype and x.shape == y.shape
        assert np.array_equal(x, y)


@pytest.mark.parametrize("cap,max_k", [(2, 4), (5, 3), (9, 2), (25, 1), (32, 3), (40, 2)])
def test_matches_fraction_expansions(cap, max_k):
    q_lo, q_hi = 2, 60
    out = sweep.sweep_block_serial(q_lo, q_hi, EMPTY, EMPTY, False, cap, max_k)
    expected = python_sums(members(q_lo, q_hi, EMPTY, EMPTY, False), cap, max_k)
    for got, exp in zip(out[:3], expected):
        assert np.array_equal(got, exp)
    # per-denominator rows: members, partial quotients, digits 1..4 from the Fraction expansions
    for q in range(q_lo, q_hi + 1):
        digs = [a for p in range(1, q) for a in fraction_digits(p, q)]
        row = [q - 1, len(digs)] + [digs.count(d) if d < cap else -1 for d in range(1, 5)]
        assert out[3][q - q_lo].tolist() == row


@settings(max_examples=15, deadline=None)
@given(q_lo=st.integers(2, 400), width=st.integers(0, 60), cap=st.integers(2, 40),
       max_k=st.integers(1, 4), coprime=st.booleans(),
       num_kind=st.sampled_from(["any", "prime", "squarefree"]),
       den_kind=st.sampled_from(["any", "prime", "squarefree"]), n_chunks=st.integers(1, 5))
def test_matches_plain_reference(q_lo, width, cap, max_k, coprime, num_kind, den_kind, n_chunks):
    q_hi = q_lo + width
    num_ok = EMPTY if num_kind == "any" else SYMPY[num_kind][:q_hi + 1]
    den_ok = EMPTY if den_kind == "any" else SYMPY[den_kind][:q_hi + 1]
    expected = ref.reference_sweep_block_serial(q_lo, q_hi, num_ok, den_ok, coprime, cap, max_k)
    assert_same(sweep.sweep_block_serial(q_lo, q_hi, num_ok, den_ok, coprime, cap, max_k), expected)
    assert_same(sweep.sweep_block(q_lo, q_hi, num_ok, den_ok, coprime, cap, max_k, n_chunks), expected)


SYMPY = {kind: sympy_class(kind, 470) for kind in ("prime", "squarefree")}


def test_thread_counts_and_chunks_agree():
    expected = ref.reference_sweep_block_serial(300, 420, EMPTY, EMPTY, True, 32, 3)
    old = numba.get_num_threads()
    try:
        for threads in (1, 2):
            numba.set_num_threads(min(threads, numba.config.NUMBA_NUM_THREADS))
            for n_chunks in (1, 2, 7):
                assert_same(sweep.sweep_block(300, 420, EMPTY, EMPTY, True, 32, 3, n_chunks), expected)
    finally:
        numba.set_num_threads(old)


@pytest.mark.parametrize("q", [2 ** 24 - 3, 2 ** 24 + 3])
def test_lanes_at_the_float32_exact_limit(q):
    # q_hi < 2**24: float32 lanes at the top of their exact range; q_hi >= 2**24: float64 lanes.
    # A thin slice of numerators keeps it fast; it holds p and q - p with only one side admissible,
    # so the mirror bookkeeping is checked with each weight alone.
    num_ok = np.zeros(q + 1, np.uint8)
    num_ok[[1, 2, 3, 5_000_000, 9_999_991, q // 2, q - 2, q - 1]] = 1
    out = sweep.sweep_block_serial(q, q, num_ok, EMPTY, False, 6, 3)
    expected = ref.reference_sweep_block_serial(q, q, num_ok, EMPTY, False, 6, 3)
    assert_same(out, expected)
    assert out[3][0, 0] == 8


@pytest.mark.parametrize("cap,max_k", [(2, 4), (3, 4), (32, 3), (32, 2)])
def test_word_cells_spill_exactly(cap, max_k):
    # Counts far above what a packed word cell holds before it is emptied into the int64 sums (the
    # check below makes sure of that), with k = 4 also the removals of the k > 3 path after a spill.
    expected = ref.reference_sweep_block_serial(2, 700, EMPTY, EMPTY, False, cap, max_k)
    assert expected[0][cap:, 0].max() > 4 * sweep.CELL_SPILL_AT
    assert_same(sweep.sweep_block_serial(2, 700, EMPTY, EMPTY, False, cap, max_k), expected)


@settings(max_examples=200, deadline=None)
@given(c=st.integers(-2 ** 15, 2 ** 15 - 1), prior=st.integers(-2 ** 21, 2 ** 21 - 1),
       m=st.integers(-2 ** 24, 2 ** 24))
def test_cell_fields_decode(c, prior, m):
    cell = c + (prior << sweep.CELL_PRIOR_SHIFT) + (m << sweep.CELL_M_SHIFT)
    assert sweep._cell_sums(np.int64(cell)) == (c, c + 2 * prior, m)


def test_large_cap_falls_back_to_reference():
    expected = ref.reference_sweep_block_serial(2, 80, EMPTY, EMPTY, False, 57, 2)
    assert_same(sweep.sweep_block(2, 80, EMPTY, EMPTY, False, 57, 2, 2), expected)


@pytest.mark.parametrize("m", [1, 2, 3, 4, 12, 30030, 2 ** 20, 3 ** 13, 510510 * 19, 2 ** 31 - 1,
                               2 ** 31 - 2, 46337 ** 2, 2 ** 61 - 1, (2 ** 31 - 1) * 6])
def test_distinct_prime_factors_match_sympy(m):
    out = np.zeros(16, np.int64)
    count = sweep._distinct_prime_factors(m, out)
    assert sorted(out[:count].tolist()) == sympy.primefactors(m)


@given(m=st.integers(1, 10 ** 12))
@settings(max_examples=200, deadline=None)
def test_distinct_prime_factors_property(m):
    out = np.zeros(16, np.int64)
    count = sweep._distinct_prime_factors(m, out)
    assert sorted(out[:count].tolist()) == sympy.primefactors(m)


@pytest.mark.parametrize("q_lo,q_hi", [(30025, 30035), (2 ** 24 - 3, 2 ** 24 - 3), (2 ** 24 + 3, 2 ** 24 + 3)])
def test_coprime_prefilter_at_composite_and_boundary_denominators(q_lo, q_hi):
    # 30030 = 2*3*5*7*11*13 has the most distinct prime factors below 5e5; the prefilter skips p
    # sharing one with q before expansion. Near 2**24 only a slice of numerators, to stay fast.
    if q_hi > 10 ** 6:
        num_ok = np.zeros(q_hi + 1, np.uint8)
        num_ok[[1, 2, 3, 6, 5_000_000, 9_999_991, q_hi // 2, q_hi - 2, q_hi - 1]] = 1
    else:
        num_ok = EMPTY
    expected = ref.reference_sweep_block_serial(q_lo, q_hi, num_ok, EMPTY, True, 32, 3)
    assert_same(sweep.sweep_block_serial(q_lo, q_hi, num_ok, EMPTY, True, 32, 3), expected)
    assert_same(sweep.sweep_block(q_lo, q_hi, num_ok, EMPTY, True, 32, 3, 3), expected)
    # the members: Euler's phi(q) per denominator (sympy's totient) when every numerator is admissible
    if num_ok is EMPTY:
        rows = expected[3]
        assert [int(r) for r in rows[:, 0]] == [int(sympy.totient(q)) for q in range(q_lo, q_hi + 1)]


@pytest.mark.parametrize("cap", [9, 12, 40])
def test_rare_digit_lists_with_many_and_repeated_items(cap):
    # Rare symbols (digits >= 9) are kept as per-lane lists; the lists with three items or more and
    # those with a repeated symbol take their own branch. At q near 10**5 both are common, checked
    # here on the Fraction expansions of one denominator so that the comparison below is not vacuous.
    q_lo, q_hi = 99_990, 100_000
    rare_symbols = [[min(a, cap) for a in fraction_digits(p, q_hi) if a >= 9] for p in range(1, q_hi // 2, 25)]
    assert sum(len(r) >= 3 for r in rare_symbols) > 100
    assert sum(len(set(r)) < len(r) for r in rare_symbols) > 20
    expected = ref.reference_sweep_block_serial(q_lo, q_hi, EMPTY, EMPTY, False, cap, 2)
    assert_same(sweep.sweep_block_serial(q_lo, q_hi, EMPTY, EMPTY, False, cap, 2), expected)
    assert_same(sweep.sweep_block(q_lo, q_hi, EMPTY, EMPTY, False, cap, 2, 3), expected)
