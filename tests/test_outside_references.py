"""Checks against published values and formulas (sources named beside each check)."""
import itertools
import math

import mpmath
import numpy as np
import pytest
import sympy
from hypothesis import given, strategies as st

from cfsweep import gauss
from cfsweep.kernels.sweep import sweep_block_serial

EMPTY = np.zeros(0, np.uint8)


def test_knuth_q29():
    # Knuth TAOCP vol. 2 §4.5.3: the expansions of k/29, k = 1..28, hold 96 partial quotients,
    # of which 39 are 1, 21 are 2 and 8 are 3.
    _, _, _, per_den = sweep_block_serial(29, 29, EMPTY, EMPTY, False, 32, 1)
    members, pqs, d1, d2, d3, _ = per_den[0]
    assert (members, pqs, d1, d2, d3) == (28, 96, 39, 21, 8)


def test_oeis_a367892_total_length():
    # OEIS A367892 (pairs 1 <= y <= x <= N): 1, 3, 7, 12, 21, 29, 43, 58, 75, 93, 121; minus N gives
    # the total length of all p/q, 1 <= p < q <= N.
    a367892 = [1, 3, 7, 12, 21, 29, 43, 58, 75, 93, 121]
    for n in range(2, 12):
        _, _, _, per_den = sweep_block_serial(2, n, EMPTY, EMPTY, False, 32, 1)
        assert int(per_den[:, 1].sum()) == a367892[n - 1] - n


def test_gauss_kuzmin_published_values():
    # Khinchin, Continued Fractions; Knuth TAOCP vol. 2 §4.5.3 (values to 20 digits).
    expected = {1: 0.41503749927884381855, 2: 0.16992500144231236291, 3: 0.09310940439148147068,
                4: 0.05889368905356851429}
    for a, value in expected.items():
        assert gauss.gauss_kuzmin(a) == pytest.approx(value, rel=1e-15)
        assert gauss.word_measure([a]) == pytest.approx(value, rel=1e-15)


@given(st.lists(st.integers(1, 60), min_size=1, max_size=6))
def test_cylinder_measure_vs_quadrature(word):
    # Gauss measure density 1/((1+x) ln 2) integrated numerically over the cylinder's endpoints.
    lo, hi = gauss.cylinder_endpoints(word)
    with mpmath.workdps(50):
        quad = mpmath.quad(lambda x: 1 / ((1 + x) * mpmath.log(2)),
                           [mpmath.mpf(lo.numerator) / lo.denominator, mpmath.mpf(hi.numerator) / hi.denominator])
        exact = gauss.word_measure_mp(word, dps=50)
        assert abs(quad - exact) < mpmath.mpf(10) ** -30 * max(1, 1 / exact)
    assert gauss.word_measure(word) == pytest.approx(float(quad), rel=1e-13)


@given(st.lists(st.integers(1, 1000), min_size=1, max_size=8))
def test_reversal_symmetry(word):
    assert gauss.word_measure(word) == pytest.approx(gauss.word_measure(word[::-1]), rel=1e-13)


def test_run_of_ones():
    # |log2(1 + (-1)^k / F_{k+2}^2)| (cylinder formula with Cassini's identity); k = 2: 0.1520030934,
    # k = 3: 0.0588936891 (check-values.md, computed).
    for k in range(1, 30):
        f = sympy.fibonacci(k + 2)
        expected = abs(math.log2(1 + (-1) ** k / f**2)) if k < 20 else abs(float(mpmath.log(1 + mpmath.mpf((-1) ** k) / f**2, 2)))
        assert gauss.word_measure([1] * k) == pytest.approx(expected, rel=1e-12)
    assert gauss.word_measure([1, 1]) == pytest.approx(0.1520030934, abs=1e-10)
    assert gauss.word_measure([1, 1, 1]) == pytest.approx(0.0588936891, abs=1e-10)


def test_prime_minus_one_digits_total():
    # Digits p - 1 (p prime) have total Gauss measure log2(pi^2/6) = 0.71802975822348141463
    # (Jin, Singh, Zhang, Hildebrand, arXiv 2403.16761). Partial sum over p < N; the tail is below
    # sum_{p >= N} 2/(p^2 ln 2) < 4 / (N ln 2).
    n = 200_000
    partial = math.fsum(gauss.gauss_kuzmin(int(p) - 1) for p in sympy.primerange(3, n))
    partial += gauss.gauss_kuzmin(1)  # p = 2
    target = math.log2(math.pi**2 / 6)
    assert target == pytest.approx(0.71802975822348141463, rel=1e-15)
    assert 0 < target - partial < 4 / (n * math.log(2))


def test_heilbronn_porter_mean_length_prime():
    # Heilbronn–Porter (check-values.md): mean length over p coprime to a prime q >= 1e5 is
    # (12 ln 2/pi^2) ln q + C - 1 within 0.01 (Porter's C from OEIS A086237).
    q = 100_003
    assert sympy.isprime(q)
    _, _, _, per_den = sweep_block_serial(q, q, EMPTY, EMPTY, True, 32, 1)
    mean = per_den[0, 1] / per_den[0, 0]
    assert per_den[0, 0] == q - 1
    assert abs(mean - gauss.heilbronn_porter_mean_length(q)) < 0.01
    assert gauss.HEILBRONN == pytest.approx(0.84276591327219451691, rel=1e-15)  # OEIS A089729


def _nsum_pooled(word, cap):
    """Independent twin for pooled words: mpmath.nsum of plain cylinder measures over pooled places."""
    pooled = [i for i, s in enumerate(word) if s >= cap]

    def term(*values):
        w = list(word)
        for i, v in zip(pooled, values):
            w[i] = int(v)
        return gauss.word_measure_mp(w, dps=None)

    with mpmath.workdps(30):
        return mpmath.nsum(term, *([[cap, mpmath.inf]] * len(pooled)))


@pytest.mark.parametrize("word,cap", [((5,), 5), ((2, 7), 7), ((7, 2), 7), ((3, 6, 2), 6), ((6, 1, 6), 6),
                                      ((1, 4, 4, 2), 4), ((4, 4), 4), ((2, 5, 1, 3), 5)])
def test_pooled_measure_vs_summed_cylinders(word, cap):
    assert gauss.word_measure(word, cap) == pytest.approx(float(_nsum_pooled(word, cap)), rel=1e-9)


@pytest.mark.parametrize("cap,k", [(3, 1), (5, 2), (4, 3), (3, 4)])
def test_pooled_alphabet_is_a_partition(cap, k):
    # The words of length k over the capped alphabet partition [0, 1]: their measures sum to 1.
    total = math.fsum(gauss.word_measure(w, cap) for w in itertools.product(range(1, cap + 1), repeat=k))
    assert total == pytest.approx(1.0, abs=1e-12)


def test_pooled_single_digit_is_gauss_kuzmin_tail():
    for cap in (2, 10, 32, 1000):
        assert gauss.word_measure([cap], cap) == pytest.approx(math.log2(1 + 1 / cap), rel=1e-14)
        expected_tail = 1 - math.fsum(gauss.gauss_kuzmin(a) for a in range(1, cap))
        assert gauss.gauss_kuzmin_tail(cap) == pytest.approx(expected_tail, abs=1e-14)


def test_first_digit_law_and_last_digit():
    # First digit a1 = k with frequency 1/(k(k+1)) over p < q, exactly in the limit; here exact counts:
    # a1 = floor(q/p) = k for p in (q/(k+1), q/k]. The last digit is never 1 (shorter expansion).
    from reference import cf_fraction
    q = 997
    firsts = [cf_fraction(p, q)[0] for p in range(1, q)]
    for k in range(1, 6):
        assert firsts.count(k) == q // k - q // (k + 1) - (1 if k == 1 else 0)
    assert all(cf_fraction(p, q)[-1] != 1 for p in range(1, q))
