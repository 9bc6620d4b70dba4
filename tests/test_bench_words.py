"""bench/bench_words.py counts word occurrences and equal-word pairs as plain Python does.

The words benchmark divides time by the occurrences it reads from the kernel's sums; this checks those
counts against first-principles expansions (tests/reference.cf_fraction, on fractions.Fraction).
"""
import math
from collections import Counter

import pytest

from bench_modules import load_bench
from reference import cf_fraction, symbol_word

Q_HI = 150


@pytest.fixture(scope="module")
def bench():
    return load_bench("bench_words.py", "cfsweep_bench_words")


def test_occurrences_and_equal_pairs_match_plain_python(bench):
    occurrences = Counter()
    equal_pairs = Counter()
    for q in range(2, Q_HI + 1):
        for p in range(1, q):
            digits = cf_fraction(p, q)
            for k in (1, 2, 3):
                m = max(0, len(digits) - k + 1)
                occurrences[k] += m
                words = Counter(symbol_word(digits[j:j + k], bench.CAP) for j in range(m))
                equal_pairs[k] += sum(math.comb(c, 2) for c in words.values())
    got = bench.word_statistics(bench.run_sweep(Q_HI, 3, 1), 3)
    for k in (1, 2, 3):
        assert got[k]["occurrences"] == occurrences[k]
        assert got[k]["equal_pairs"] == equal_pairs[k]
    # words do repeat inside rationals (runs of 1s at least), so the pairs are not vacuous
    assert equal_pairs[2] > 0 and equal_pairs[3] > 0


def test_validate_accepts_the_kernel(bench):
    stats = bench.validate(300)
    assert stats[2]["occurrences"] > stats[3]["occurrences"] > 0
