"""Benchmark of the stream: terms per second of the kernel, word counting, and M = 1e5 certain decimals.

Validates before timing (kernel against a plain Euclid twin, decimals with gmpy2 against Python ints and
against mpmath), keeps compile time out of the figures (reported separately), writes
bench/results/stream.json. Run: .venv/bin/python bench/bench_stream.py [--terms N]
"""
from __future__ import annotations

import argparse
import json
import platform
import time
from pathlib import Path

import mpmath
import numpy as np

from cfsweep import stream as S


def plain_stream(n: int) -> list[int]:
    out, q = [], 2
    while len(out) < n:
        for p in range(1, q):
            x, y = q, p
            while y:
                out.append(x // y)
                x, y = y, x % y
        q += 1
    return out[:n]


def time_stream(family: str, terms: int, chunk: int) -> float:
    reader = S.StreamReader(family)
    buf = np.empty(chunk, np.int64)
    t0 = time.perf_counter()
    left = terms
    while left > 0:
        view = buf[: min(chunk, left)]
        reader.read_into(view)
        left -= view.shape[0]
    return time.perf_counter() - t0


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--terms", type=int, default=2 * 10 ** 8)
    ap.add_argument("--repeats", type=int, default=3)
    args = ap.parse_args()
    results: dict = {"machine": platform.processor() or platform.machine(), "python": platform.python_version()}

    t0 = time.perf_counter()
    first = np.concatenate(list(S.iter_stream("all", 10 ** 5, chunk_size=4096)))
    counter = S._WordCounter(2)
    counter.add(first[:1000], 1000)
    results["compile_seconds"] = time.perf_counter() - t0
    assert first.tolist() == plain_stream(10 ** 5), "stream kernel disagrees with the plain twin"

    chunk = S.DEFAULT_CHUNK_SIZE
    for family, terms in (("all", args.terms), ("reduced", args.terms // 4), ("prime", args.terms // 4)):
        times = [time_stream(family, terms, chunk) for _ in range(args.repeats)]
        best = min(times)
        results[f"stream_{family}"] = dict(terms=terms, seconds_min=best, seconds_all=times,
                                           million_terms_per_second=terms / best / 1e6)

    n = args.terms // 4
    digits = np.concatenate(list(S.iter_stream("all", n, chunk_size=chunk)))
    for max_k in (1, 2, 3):
        times = []
        for _ in range(args.repeats):
            counter = S._WordCounter(max_k)
            t = time.perf_counter()
            for lo in range(0, n, chunk):
                counter.add(digits[lo: lo + chunk], int(digits[lo: lo + chunk].max()))
            times.append(time.perf_counter() - t)
        results[f"count_words_K{max_k}"] = dict(terms=n, seconds_min=min(times),
                                                million_terms_per_second=n / min(times) / 1e6)
    del digits

    t = time.perf_counter()
    table = S.prefix_discrepancy("all", 10 ** 7, 2)
    results["prefix_discrepancy_all_1e7_K2_seconds"] = time.perf_counter() - t
    results["prefix_discrepancy_all_1e7_K2"] = S.summarize_discrepancy(table).to_pylist()

    m = 10 ** 5
    times = []
    for _ in range(args.repeats):
        t = time.perf_counter()
        expansion = S.decimal_expansion("all", m)
        times.append(time.perf_counter() - t)
    results["decimals_1e5_gmpy2"] = dict(seconds_min=min(times), seconds_all=times, terms_used=expansion.terms)
    real_gmpy, real_mpz = S._gmpy2, S._mpz
    try:
        S._gmpy2, S._mpz = None, int
        t = time.perf_counter()
        plain = S.decimal_expansion("all", m)
        results["decimals_1e5_python_int"] = dict(seconds=time.perf_counter() - t)
    finally:
        S._gmpy2, S._mpz = real_gmpy, real_mpz
    assert plain.digits == expansion.digits, "gmpy2 and Python-int decimals disagree"
    check = 4000
    terms = np.concatenate(list(S.iter_stream("all", 8000))).tolist()
    with mpmath.workdps(check + 100):
        x = mpmath.mpf(0)
        for a in reversed(terms):
            x = 1 / (a + x)
        ref = str(int(mpmath.floor(x * mpmath.mpf(10) ** check))).zfill(check)
    assert expansion.digits[:check] == ref, "decimals disagree with mpmath"
    results["decimals_validated_against_mpmath_digits"] = check

    out = Path(__file__).parent / "results" / "stream.json"
    out.parent.mkdir(exist_ok=True)
    out.write_text(json.dumps(results, indent=2) + "\n")
    print(json.dumps(results, indent=2))


if __name__ == "__main__":
    main()
