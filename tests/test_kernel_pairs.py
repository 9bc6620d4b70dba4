"""tally_pairs: explicit fractions up to q < 2**63 against plain Euclid on Python integers."""
import random

import numpy as np
import pytest
from hypothesis import given, settings, strategies as st

from cfsweep.kernels import sweep, sweep_reference as ref
from test_kernel_sweep import python_sums, sums_from_expansions

EMPTY = np.zeros(0, np.uint8)


def euclid_digits(p, q):
    digits = []
    while p:
        a, r = divmod(q, p)
        digits.append(a)
        q, p = p, r
    return digits


def boundary_pairs(rng):
    """Pairs whose remainders cross 2**24, 2**53 and reach 2**63 - 1, plus Fibonacci-like worst cases."""
    pairs = []
    for top in (2 ** 24, 2 ** 53, 2 ** 63 - 1):
        for dq in (-3, -1, 0, 1, 2):
            q = min(top + dq, 2 ** 63 - 1)
            for p in (1, 2, 3, q // 2, q // 2 + 1, q - 1, q - 2, rng.randrange(1, q)):
                if 0 < p < q:
                    pairs.append((p, q))
    fib = [1, 2]
    while fib[-1] < 2 ** 63 - 1:
        fib.append(fib[-1] + fib[-2])
    pairs += [(fib[i - 1], fib[i]) for i in range(1, len(fib) - 1)]
    # non-reduced pairs near the top: digits of the reduced form
    pairs += [(3 * 7, 3 * 11), (2 ** 62 - 2, 2 ** 63 - 2), (6 * 10 ** 17, 9 * 10 ** 18)]
    return pairs


def check(pairs, cap, max_k, dtype, serial=True):
    ps = np.array([p for p, _ in pairs], dtype)
    qs = np.array([q for _, q in pairs], dtype)
    # plain Euclid on Python integers, then the same sums as the Fraction twin (integers only)
    expected = sums_from_expansions([euclid_digits(p, q) for p, q in pairs], cap, max_k)
    if serial:
        for got, exp in zip(sweep.tally_pairs_serial(ps, qs, cap, max_k), expected):
            assert np.array_equal(got, exp)
    for n_chunks in (1, 3):
        for got, exp in zip(sweep.tally_pairs(ps, qs, cap, max_k, n_chunks), expected):
            assert np.array_equal(got, exp)


@pytest.mark.parametrize("dtype", [np.int64, np.uint64])
@pytest.mark.parametrize("cap,max_k", [(2, 3), (8, 2), (32, 3), (40, 1)])
def test_boundaries_and_top_of_range(dtype, cap, max_k):
    # the serial twin shares its code with the parallel one; compiling it once (uint64) keeps the tests fast
    check(boundary_pairs(random.Random(7)), cap, max_k, dtype, serial=dtype == np.uint64)


@settings(max_examples=20, deadline=None)
@given(st.lists(st.tuples(st.integers(1, 2 ** 63 - 2), st.integers(2, 2 ** 63 - 1)), min_size=1,
                max_size=40), st.integers(2, 40), st.integers(1, 4))
def test_random_pairs(raw, cap, max_k):
    pairs = [(min(a, b - 1), b) for a, b in raw]
    check(pairs, cap, max_k, np.uint64)


def test_small_pairs_match_fraction_twin_and_sweep():
    pairs = [(p, q) for q in range(2, 70) for p in range(1, q)]
    ps = np.array([p for p, _ in pairs], np.int64)
    qs = np.array([q for _, q in pairs], np.int64)
    got = sweep.tally_pairs(ps, qs, 7, 3, 2)
    for a, b in zip(got, python_sums(pairs, 7, 3)):
        assert np.array_equal(a, b)
    swept = ref.reference_sweep_block_serial(2, 69, EMPTY, EMPTY, False, 7, 3)
    for a, b in zip(got, swept[:3]):
        assert np.array_equal(a, b)
