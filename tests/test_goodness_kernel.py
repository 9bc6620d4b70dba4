"""Per-rational goodness: kernel vs exact rational arithmetic with mpmath Gauss measures."""
import functools
import itertools
from fractions import Fraction

import mpmath
import numpy as np
import pytest
from hypothesis import given, strategies as st

from cfsweep import gauss
from cfsweep.goodness import required_counts, required_words
from cfsweep.kernels.goodness import cylinder_measure_f64, rational_goodness
from reference import cf_fraction


@functools.lru_cache(maxsize=None)
def brute_required(eps, max_k):
    # mu(w) <= GK(b_i) for every digit of w (shift invariance), so only digits with GK > eps matter.
    digits = list(itertools.takewhile(lambda a: gauss.gauss_kuzmin(a) > eps, itertools.count(1)))
    words = []
    for k in range(1, max_k + 1):
        for w in itertools.product(digits, repeat=k):
            if gauss.word_measure_mp(w, dps=30) > eps:
                words.append(w)
    return sorted(words, key=lambda w: (len(w), w))


@functools.lru_cache(maxsize=None)
def _mu_mp(word):
    return gauss.word_measure_mp(word, dps=30)


def reference_good(digits, eps, max_k, min_len):
    """Exact frequencies (Fractions) against mpmath measures; absent words count with frequency 0."""
    n = len(digits)
    if n < min_len:
        return False
    for w in brute_required(eps, max_k):
        if not any(tuple(digits[j:j + len(w)]) == w for j in range(n - len(w) + 1)):
            return False
    with mpmath.workdps(30):
        for k in range(1, max_k + 1):
            m = n - k + 1
            for j in range(max(m, 0)):
                w = tuple(digits[j:j + k])
                c = sum(tuple(digits[i:i + k]) == w for i in range(m))
                f = Fraction(c, m)
                if abs(mpmath.mpf(f.numerator) / f.denominator - _mu_mp(w)) > eps:
                    return False
    return True


@pytest.mark.parametrize("eps,max_k", [(0.05, 1), (0.1, 2), (0.2, 2), (0.03, 2), (0.3, 3)])
def test_required_words_match_brute_force(eps, max_k):
    assert required_words(eps, max_k) == brute_required(eps, max_k)


@given(st.lists(st.integers(1, 10**9), min_size=1, max_size=12))
def test_cylinder_measure_f64_matches_gauss_module(word):
    arr = np.array(word, np.int64)
    assert cylinder_measure_f64(arr, 0, len(word)) == pytest.approx(gauss.word_measure(word), rel=1e-12)


def _kernel_good(digits, eps_values, max_k, min_len):
    eps = np.array(eps_values, np.float64)
    req = required_counts(eps_values, max_k)
    out = np.zeros(len(eps_values), np.uint8)
    buf = np.zeros(max(len(digits), 1), np.int64)
    buf[:len(digits)] = digits
    rational_goodness(buf, len(digits), max_k, min_len, eps, req, out)
    return [bool(x) for x in out]


@given(st.integers(2, 5000).flatmap(lambda q: st.tuples(st.integers(1, q - 1), st.just(q))),
       st.sampled_from([(0.05,), (0.1, 0.2), (0.05, 0.1, 0.2), (0.3,)]), st.integers(1, 2), st.integers(1, 6))
def test_goodness_matches_exact_reference(pq, eps_values, max_k, min_len):
    digits = cf_fraction(*pq)
    got = _kernel_good(digits, eps_values, max_k, min_len)
    assert got == [reference_good(digits, e, max_k, min_len) for e in eps_values]


@given(st.lists(st.one_of(st.integers(1, 4), st.integers(14, 18), st.integers(62, 66), st.integers(1022, 1026)),
                min_size=1, max_size=12),
       st.sampled_from([(0.05,), (0.1, 0.3), (0.2, 0.5, 0.9)]), st.integers(1, 3), st.integers(1, 3))
def test_goodness_of_digit_strings_around_the_table_bounds(digits, eps_values, max_k, min_len):
    # words of one to three small digits are counted in a table by code, any other word digit by digit;
    # digits on both sides of the table bounds (16 for three digits, 64 for two, 1024 for one), repeated, mix
    # the two ways within one rational
    got = _kernel_good(digits, eps_values, max_k, min_len)
    assert got == [reference_good(digits, e, max_k, min_len) for e in eps_values]


def test_goodness_decided_by_words_at_the_table_bounds():
    # single words whose measure decides the verdict: f = 1 and mu tiny gives a deviation near 1, so
    # eps just below or above it flips the answer; a word filed under a neighbour's code (or given a
    # neighbour's measure) would flip it the other way
    cases = [[2, 63], [2, 64], [2, 65], [63, 2], [64, 2], [1023], [1024], [1025], [2, 1023, 2, 1023],
             [2, 15, 3], [2, 16, 3], [2, 17, 3], [16, 2, 2], [15, 15, 15]]
    verdicts = []
    for digits in cases:
        for max_k in (1, 2, 3):
            m = len(digits) - max_k + 1
            word = tuple(digits[:max_k])
            dev = float(1 - _mu_mp(word)) if m == 1 else None
            eps_values = [0.9, 0.99] + ([dev * (1 - 1e-9), dev * (1 + 1e-9)] if dev else [])
            got = _kernel_good(digits, eps_values, max_k, 1)
            assert got == [reference_good(digits, e, max_k, 1) for e in eps_values], (digits, max_k)
            verdicts += got
    assert True in verdicts and False in verdicts


def test_goodness_edge_cases():
    # n < k: a single digit has no word of length 2, so every required word of length 2 is absent.
    assert _kernel_good([2], [0.9], 2, 1) == [True]   # nothing has mu > 0.9 at k = 2; |1 - mu(2)| = 0.83 <= 0.9
    assert _kernel_good([2], [0.5], 1, 1) == [False]  # digit 1 (mu 0.415) absent is fine, but f(2) = 1
    # a digit far above any table cap: counted exactly, unpooled
    assert _kernel_good([1, 1, 1000, 1, 2], [0.3], 1, 1) == [reference_good([1, 1, 1000, 1, 2], 0.3, 1, 1)]
    # tolerances just above and below the largest deviation: digits [1, 2] have f(2) = 1/2 and
    # |1/2 - mu(2)| = 0.33007... > |1/2 - mu(1)|; only the digit 1 has mu > 0.33, and it occurs.
    dev = 0.5 - gauss.gauss_kuzmin(2)
    for eps, expect in ((dev * (1 + 1e-9), True), (dev * (1 - 1e-9), False)):
        assert _kernel_good([1, 2], [eps], 1, 1) == [reference_good([1, 2], eps, 1, 1)] == [expect]
    # mu just above / below eps decides whether an absent word is required: digit 3 (mu = 0.0931) absent
    mu3 = gauss.gauss_kuzmin(3)
    assert _kernel_good([1, 1, 2, 1, 2], [mu3 * (1 + 1e-9)], 1, 1) == [reference_good([1, 1, 2, 1, 2], mu3 * (1 + 1e-9), 1, 1)]
    assert _kernel_good([1, 1, 2, 1, 2], [mu3 * (1 - 1e-9)], 1, 1) == [False]


def test_goodness_block_per_denominator_matches_reference():
    # Per-q good counts of the kernel equal the plain-Python counts for all q <= 300, several eps and k.
    from cfsweep.families import parse_family
    from cfsweep.kernels.goodness import goodness_block
    from reference import member

    q_max = 300
    for family, eps_values, max_k, min_len in [("all", (0.05, 0.1, 0.2), 1, 1), ("reduced", (0.1, 0.2), 2, 2),
                                               ("squarefree", (0.2, 0.3), 2, 3)]:
        f = parse_family(family)
        num_ok, den_ok, cop = f.membership(q_max)
        eps = np.array(eps_values)
        got = goodness_block(2, q_max, num_ok, den_ok, cop, max_k, min_len, eps, required_counts(eps_values, max_k), 3)
        for q in range(2, q_max + 1):
            want = [0] * len(eps_values)
            for p in range(1, q):
                if member(f.base, f.num, f.den, p, q):
                    digits = cf_fraction(p, q)
                    for e, ev in enumerate(eps_values):
                        want[e] += _reference_good_cached(tuple(digits), ev, max_k, min_len)
            assert list(got[q - 2]) == want, (family, q)


_CACHE = {}


def _reference_good_cached(digits, eps, max_k, min_len):
    key = (digits, eps, max_k, min_len)
    if key not in _CACHE:
        _CACHE[key] = reference_good(list(digits), eps, max_k, min_len)
    return _CACHE[key]


def test_goodness_pairs_matches_block():
    from cfsweep.kernels.goodness import goodness_block, goodness_pairs

    empty = np.zeros(0, np.uint8)
    eps_values = (0.1, 0.2)
    eps = np.array(eps_values)
    req = required_counts(eps_values, 2)
    per_q = goodness_block(2, 200, empty, empty, False, 2, 2, eps, req, 2)
    ps = np.array([p for q in range(2, 201) for p in range(1, q)], np.uint64)
    qs = np.array([q for q in range(2, 201) for p in range(1, q)], np.uint64)
    edges = np.array([2, 50, 120, 201], np.uint64)
    got = goodness_pairs(ps, qs, edges, 2, 2, eps, req, 3)
    for b in range(3):
        lo, hi = int(edges[b]), int(edges[b + 1])
        assert got[b, 0] == sum(q - 1 for q in range(lo, hi))
        assert list(got[b, 1:]) == list(per_q[lo - 2:hi - 2].sum(axis=0))
