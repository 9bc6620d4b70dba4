"""Closed forms of the lattice kernels against direct summation (slow, obviously correct twins)."""
import math

import numba
import numpy as np
import pytest
import sympy
from hypothesis import given, settings, strategies as st

from cfsweep.kernels import lattice as L

SMALL = settings(max_examples=300, deadline=None)


def fs_direct(n, m, a, b):
    return sum((a * i + b) // m for i in range(n))


def triangle_direct(l1, l2, x, e):
    c = sum(1 for d in range(1, x + 1) for g in range(1, d) if l1 * g + l2 * d <= x)
    return c + (e * (x // l2))


def corner_direct(m1, m2, x, b_low):
    return sum(1 for b in range(b_low + 1, x + 2) for a in range(1, b) if a * m1 + b * m2 <= x)


def bsum_direct(x, dd, g, mth, d0):
    return sum(max(0, (x - b * g) // dd - max(mth, d0 * b)) for b in range(1, x + 2))


@SMALL
@given(st.integers(0, 60), st.integers(1, 40), st.integers(0, 100), st.integers(0, 100))
def test_floor_sum_matches_direct_sum(n, m, a, b):
    assert L.floor_sum(n, m, a, b) == fs_direct(n, m, a, b)


def test_floor_sum_large_arguments_against_python_integers():
    rng = np.random.default_rng(5)
    for _ in range(200):
        n, m, a, b = (int(v) for v in rng.integers(1, 10 ** 6, 4))
        n = n % 3000
        assert L.floor_sum(n, m, a, b) == fs_direct(n, m, a, b)


@SMALL
@given(st.integers(1, 12), st.integers(1, 12), st.integers(0, 150), st.integers(0, 1))
def test_triangle_count_matches_direct(l1, l2, x, e):
    assert L.triangle_count(l1, l2, x, e) == triangle_direct(l1, l2, x, e)


@SMALL
@given(st.integers(1, 12), st.integers(1, 12), st.integers(0, 150), st.integers(1, 8))
def test_corner_count_matches_direct(m1, m2, x, b_low):
    assert L.corner_count(m1, m2, x, b_low) == corner_direct(m1, m2, x, b_low)


@SMALL
@given(st.integers(0, 300), st.integers(1, 15), st.integers(0, 14), st.integers(2, 6), st.integers(0, 20))
def test_bucket_bsum_matches_direct(x, dd, g, d0, extra):
    mth = d0 + extra
    assert L.bucket_bsum(x, dd, g, mth, d0) == bsum_direct(x, dd, g, mth, d0)


def word_volume_direct(x, w11, w12, w21, w22, e):
    c = 0
    for b in range(2, x + 1):
        for a in range(1, b):
            for d in range(1, x + 1):
                for g in range(0 if e else 1, d):
                    if a * (w11 * g + w12 * d) + b * (w21 * g + w22 * d) <= x:
                        c += 1
    return c


@pytest.mark.parametrize("word_mat", [(0, 1, 1, 1, 0), (0, 1, 1, 2, 1), (1, 2, 1, 3, 1), (1, 1, 1, 2, 0), (2, 3, 3, 5, 1)])
def test_word_volume_matches_quadruple_loop(word_mat):
    for x in [0, 1, 5, 17, 40, 61]:
        assert L.word_volume(x, *word_mat) == word_volume_direct(x, *word_mat)


def bucket_volume_direct(x, d0):
    return sum(1 for b in range(1, x + 1) for m in range(d0 * b + 1, x + 1) for d in range(1, x + 1)
               for g in range(d) if m * d + b * g <= x)


@pytest.mark.parametrize("d0", [2, 3, 7])
def test_bucket_volume_matches_direct(d0):
    for x in [0, 1, 9, 30, 55, 80]:
        assert L.bucket_volume(x, d0) == bucket_volume_direct(x, d0)


@pytest.mark.parametrize("q", [1, 2, 3, 4, 10, 99, 100, 101, 1000, 12345])
def test_divisor_grid_is_the_set_of_quotients(q):
    assert list(L.divisor_grid(q)) == sorted({q // m for m in range(1, q + 1)})


@pytest.mark.parametrize("q", [1, 7, 100, 997, 5000, 40000])
def test_mertens_on_grid_matches_sieve(q):
    vals = L.divisor_grid(q)
    mu = L.mobius_sieve(q)
    prefix = np.cumsum(mu.astype(np.int64))
    assert list(L.mertens_on_grid(q, vals)) == [int(prefix[v]) for v in vals]
    phi = L.totient_sieve(q)
    prefix_phi = np.cumsum(phi)
    assert list(L.totient_summatory_on_grid(q, vals)) == [int(prefix_phi[v]) for v in vals]


def test_sieves_against_sympy():
    mu = L.mobius_sieve(500)
    phi = L.totient_sieve(500)
    for n in range(1, 501):
        assert mu[n] == sympy.mobius(n)
        assert phi[n] == sympy.totient(n)


def test_mertens_large_grid_value_against_sympy_sum():
    # q large enough that the recursion (not only the sieve) is used for the top values.
    q = 6000  # sieve limit ~ q**(2/3) = 331, so the top grid values go through the recursion
    vals = L.divisor_grid(q)
    mert = L.mertens_on_grid(q, vals)
    expected = sum(int(sympy.mobius(n)) for n in range(1, q + 1))
    assert mert[-1] == expected


def test_isqrt_exact():
    for n in list(range(0, 2000)) + [10 ** 12 - 1, 10 ** 12, 10 ** 12 + 1, (2 ** 31 - 1) ** 2, 2 ** 62 - 1]:
        assert L.isqrt(n) == math.isqrt(n)


def test_divisor_summatory_against_direct():
    for y in range(0, 300):
        assert L.divisor_summatory(y) == sum(y // a for a in range(1, y + 1))


def test_serial_and_parallel_paths_give_identical_integers():
    q = 3000
    vals = L.divisor_grid(q)
    previous = numba.get_num_threads()
    try:
        numba.set_num_threads(min(2, numba.config.NUMBA_NUM_THREADS))
        for n_chunks in (2, 3, 7):
            order, starts = L.deal_chunks(vals, n_chunks)
            assert sorted(order) == list(range(len(vals)))
            for w in [(0, 1, 1, 1, 0), (1, 2, 1, 3, 1)]:
                assert np.array_equal(L.word_volumes_serial(vals, *w), L.word_volumes_parallel(vals, *w, order, starts))
            assert np.array_equal(L.bucket_volumes_serial(vals, 2), L.bucket_volumes_parallel(vals, 2, order, starts))
    finally:
        numba.set_num_threads(previous)
