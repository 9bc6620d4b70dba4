"""The benchmark's implementations (bench/run.py, bench/c/cfref.c) count exactly what plain Python counts.

The benchmark validates every implementation against the cfsweep kernel before timing it; this test
checks them all, the kernel included, against an independent first-principles count (tests/reference.py,
whose expansions are themselves checked against fractions.Fraction and sympy), so that a C reference that
fails to build or miscounts on some CPU shows here and not only in a benchmark run.
"""
import shutil
from collections import Counter

import numpy as np
import pytest

from bench_modules import load_bench
from reference import cf_fraction

CAP = 32
Q_LO, Q_HI = 2, 260


@pytest.fixture(scope="module")
def bench():
    return load_bench("run.py", "cfsweep_bench_run")


@pytest.fixture(scope="module")
def expected():
    """Digit histogram (symbol min(a, CAP) - 1), length histogram and per-denominator rows."""
    hist = np.zeros(CAP, np.int64)
    lengths = np.zeros(129, np.int64)
    rows = np.zeros((Q_HI - Q_LO + 1, 6), np.int64)
    for q in range(Q_LO, Q_HI + 1):
        digits = Counter()
        for p in range(1, q):
            cf = cf_fraction(p, q)
            for a in cf:
                hist[min(a, CAP) - 1] += 1
            digits.update(cf)
            lengths[len(cf)] += 1
            rows[q - Q_LO, 1] += len(cf)
        rows[q - Q_LO, 0] = q - 1
        rows[q - Q_LO, 2:] = [digits[d] for d in range(1, 5)]
    return hist, lengths, rows


@pytest.fixture(scope="module")
def c_library(bench, tmp_path_factory):
    if shutil.which("gcc") is None:
        pytest.skip("gcc is not on this machine")
    return bench.build_c(tmp_path_factory.mktemp("cfref"))


def test_python_and_numpy_references(bench, expected):
    for fn in (bench.python_sweep, bench.numpy_sweep):
        hist, lengths = fn(Q_LO, Q_HI, CAP)
        assert np.array_equal(hist, expected[0])
        assert np.array_equal(lengths, expected[1])


def test_numba_plain_reference(bench, expected):
    hist, lengths = bench.numba_plain_sweep(Q_LO, Q_HI, CAP, 3)
    assert np.array_equal(hist, expected[0])
    assert np.array_equal(lengths, expected[1])


@pytest.mark.parametrize("max_k", [1, 3])
def test_kernel_runner(bench, expected, max_k):
    for threads in (1, 2):
        hist, lengths, rows = bench.kernel_runner(max_k)(Q_LO, Q_HI, CAP, threads)
        assert np.array_equal(hist, expected[0])
        assert np.array_equal(lengths, expected[1])
        assert np.array_equal(rows, expected[2])


def test_c_references(bench, expected, c_library):
    dll, _, _, simd = c_library
    for name, run in bench.c_runners(dll, simd).items():
        for threads in (1, 2):
            hist, lengths, rows = run(Q_LO, Q_HI, CAP, threads)
            assert np.array_equal(hist, expected[0]), name
            assert np.array_equal(lengths, expected[1]), name
            assert np.array_equal(rows, expected[2]), name


def test_c_simd_reference_is_built_where_the_cpu_allows(c_library):
    """AVX-512 or AVX2 + FMA in /proc/cpuinfo means the SIMD reference must be compiled in."""
    try:
        flags = next(line for line in open("/proc/cpuinfo") if line.startswith("flags")).split()
    except (OSError, StopIteration):
        pytest.skip("no /proc/cpuinfo flags")
    _, _, _, simd = c_library
    if "avx512f" in flags:
        assert simd == "avx512"
    elif "avx2" in flags and "fma" in flags:
        assert simd == "avx2"
    else:
        assert simd == "none"
