"""Exact counts against brute force, an independent scheme, identities and published values."""
import math
from fractions import Fraction

import numba
import numpy as np
import pytest
import sympy

from cfsweep.exact import _Grid, exact_counts, word_matrix
from cfsweep.kernels import lattice as L
from cfsweep.kernels._jit import UNCACHED

import _exact_brute as brute

CAP = 21  # digits 1..20 one by one, bucket d > 20


@pytest.fixture(scope="module")
def brute_digits():
    return brute.cumulative(1000, (), CAP)


def test_brute_expansion_matches_fraction_and_sympy():
    for q in range(2, 60):
        for p in range(1, q):
            a = brute.expansion(p, q)
            # sympy gives [0, a1, ..., an] with an >= 2 for rationals in (0, 1)
            assert [0] + a == list(sympy.continued_fraction(sympy.Rational(p, q)))
            x, b = Fraction(p, q), []
            while x:
                x = 1 / x
                b.append(math.floor(x))
                x -= math.floor(x)
            assert a == b


def test_digits_bucket_and_total_for_every_q_up_to_1000(brute_digits):
    for q in range(2, 1001):
        r = exact_counts(q, cap=CAP, threads=1)
        for f, name in enumerate(("all", "reduced")):
            b = brute_digits[q][f]
            fc = r.families[name]
            assert fc.fractions == b["fractions"]
            assert fc.total_length == b["total"]
            assert [fc.digit_counts[d] for d in range(1, CAP)] == b["digits"][1:CAP]
            assert fc.bucket == b["digits"][CAP]


WORDS = ((1, 1), (1, 2), (2, 1), (3, 2), (1, 1, 1), (2, 1, 2), (1, 2, 1, 1), (1, 1, 1, 1, 2), (2, 1, 1, 2, 1),
         (1, 1, 1, 1, 1, 1), (1, 2, 1, 2, 1, 2))


def test_words_of_length_2_to_6_for_every_q_up_to_400():
    cum = brute.cumulative(400, WORDS, 4)
    for q in range(2, 401):
        r = exact_counts(q, cap=4, words=WORDS, threads=1)
        for f, name in enumerate(("all", "reduced")):
            b = cum[q][f]
            fc = r.families[name]
            assert fc.word_counts == b["words"], q
            for k, pos in fc.positions.items():
                assert pos == sum(max(0, n - k + 1) * c for n, c in b["lengths"].items())


# ---- the simpler (beta, delta) scheme: an independent twin -------------------------------------

@numba.njit(**UNCACHED)
def _rect(n_a, n_c, s_a, s_c, rest):
    """#{1 <= i <= n_a, 1 <= j <= n_c : s_a i + s_c j <= rest}."""
    if n_a <= 0 or n_c <= 0 or rest < s_a + s_c:
        return 0
    i2 = min(n_a, (rest - s_c) // s_a)
    top = rest - s_c * n_c
    i1 = 0 if top < s_a else min(i2, top // s_a)
    return i1 * n_c + L.floor_sum(i2 - i1, s_c, s_a, rest - s_a * i2)


@numba.njit(**UNCACHED)
def _sqfree_divisors(n, spf, divs, mus):
    """Fill the square-free divisors of n and their Möbius signs; return how many."""
    primes = np.empty(16, np.int64)
    k = 0
    while n > 1:
        p = spf[n]
        primes[k] = p
        k += 1
        while n % p == 0:
            n //= p
    cnt = 1
    divs[0] = 1
    mus[0] = 1
    for i in range(k):
        for j in range(cnt):
            divs[cnt + j] = divs[j] * primes[i]
            mus[cnt + j] = -mus[j]
        cnt *= 2
    return cnt


@numba.njit(**UNCACHED)
def scheme_beta_delta(q, d):
    """(N_d(q), R_d(q)) by the per-(beta, delta) scheme with Möbius over divisors of beta and delta."""
    spf = np.zeros(q + 1, np.int64)
    for i in range(2, q + 1):
        if spf[i] == 0:
            for m in range(i, q + 1, i):
                if spf[m] == 0:
                    spf[m] = i
    eps = 1 if d >= 2 else 0
    db = np.empty(1 << 12, np.int64)
    mb = np.empty(1 << 12, np.int64)
    dd_ = np.empty(1 << 12, np.int64)
    md = np.empty(1 << 12, np.int64)
    n_tot = 0
    r_tot = 0
    for beta in range(1, q // d + 1):
        nb = _sqfree_divisors(beta, spf, db, mb)
        for delta in range(1, q // (d * beta) + 1):
            rest = q - d * beta * delta
            nd = _sqfree_divisors(delta, spf, dd_, md)
            if beta == 1:
                for alpha in range(2):
                    lim = rest - alpha * delta
                    if lim >= 0:
                        m = min(delta - 1, lim)
                        n_tot += m + eps
                        for j in range(nd):
                            r_tot += md[j] * (m // dd_[j])
                        if delta == 1:
                            r_tot += eps
            else:
                for i in range(nb):
                    s = db[i]
                    ns = (beta - 1) // s
                    n_tot += 2 * mb[i] * (_rect(ns, delta - 1, s * delta, beta, rest)
                                          + eps * min(ns, rest // (s * delta)))
                    for j in range(nd):
                        f = dd_[j]
                        r_tot += 2 * mb[i] * md[j] * _rect(ns, (delta - 1) // f, s * delta, beta * f, rest)
                    if delta == 1:
                        r_tot += 2 * eps * mb[i] * min(ns, rest // s)
    return n_tot, r_tot


def test_beta_delta_twin_agrees_with_brute_force_small(brute_digits):
    for q in (2, 3, 10, 57, 300, 1000):
        for d in (1, 2, 3, 7):
            assert scheme_beta_delta(q, d) == (brute_digits[q][0]["digits"][d], brute_digits[q][1]["digits"][d])


@pytest.mark.parametrize("q", [20000, 49999, 100000])
def test_fast_counter_matches_beta_delta_scheme_at_larger_q(q):
    grid = _Grid(q, 1)
    for d in (1, 2, 3, 7, 20):
        assert grid.word((d,)) == scheme_beta_delta(q, d)


# ---- identities -------------------------------------------------------------------------------

def test_digit_equals_difference_of_buckets():
    q = 5000
    grid = _Grid(q, 1)
    buckets = {d0: grid.bucket(d0) for d0 in range(2, 13)}
    for d in range(2, 12):
        n, r = grid.word((d,))
        assert n == buckets[d][0] - buckets[d + 1][0]
        assert r == buckets[d][1] - buckets[d + 1][1]


@pytest.mark.parametrize("b2", [1, 2, 3])
def test_marginal_identity_first_digit_summed_out(b2):
    q = 3000
    grid = _Grid(q, 1)
    total = sum(grid.word((b1, b2))[0] for b1 in range(1, q + 1) if 1 + b1 * b2 <= q)
    e = 1 if b2 >= 2 else 0
    assert total == grid.word((b2,))[0] - L.triangle_count(1, b2, q, e)


def test_word_matrix_is_the_continuant_product():
    for w in [(1,), (3,), (1, 2), (2, 1, 3), (1, 1, 1, 1)]:
        m = sympy.eye(2)
        for b in w:
            m = m * sympy.Matrix([[0, 1], [1, b]])
        w11, w12, w21, w22, e = word_matrix(w)
        assert (w11, w12, w21, w22) == (m[0, 0], m[0, 1], m[1, 0], m[1, 1])
        assert e == (1 if w[-1] >= 2 else 0)


def test_oeis_a367892_total_lengths():
    # OEIS A367892 (pairs 1 <= y <= x <= N): 1, 3, 7, 12, 21, 29, 43, 58, 75, 93, 121; minus N gives
    # sum_{1 <= p < q <= N} L(p/q).
    a367892 = [1, 3, 7, 12, 21, 29, 43, 58, 75, 93, 121]
    for n in range(2, 12):
        assert exact_counts(n, cap=4, threads=1).families["all"].total_length == a367892[n - 1] - n
    # N = 1: no fractions; the kernels give 0 as well.
    vals = L.divisor_grid(1)
    mert = L.mertens_on_grid(1, vals)
    assert L.word_counts_from_volumes(1, vals, mert, L.word_volumes_serial(vals, 0, 1, 1, 1, 0), 0, 1, 1, 1, 0)[0][-1] == 0
    assert L.bucket_counts_from_volumes(1, vals, mert, L.bucket_volumes_serial(vals, 2), 2)[0][-1] == 0 == a367892[0] - 1


def test_knuth_denominator_29():
    # Knuth, TAOCP vol. 2, §4.5.3: k/29 for k = 1..28 have 96 partial quotients, 39 ones, 21 twos, 8 threes.
    a, b = exact_counts(29, cap=4, threads=1), exact_counts(28, cap=4, threads=1)
    for name in ("all", "reduced"):
        x, y = a.families[name], b.families[name]
        assert x.total_length - y.total_length == 96
        assert [x.digit_counts[d] - y.digit_counts[d] for d in (1, 2, 3)] == [39, 21, 8]


def test_serial_and_threaded_results_are_identical():
    words = [(1, 2), (2, 1, 1)]
    r1 = exact_counts(4000, cap=8, words=words, threads=1)
    r2 = exact_counts(4000, cap=8, words=words, threads=min(2, numba.config.NUMBA_NUM_THREADS))
    assert r1.families == r2.families
