"""The goodness pass against the sweep it rides on: seconds per block of all p/q with q <= Q.

For K = 1, 2, 3 (eps 0.05, 0.1, 0.2, min length K) times goodness_block on 2 threads next to the
digits-only sweep of the same fractions (interleaved repeats, minimum), after a warm-up call that
compiles or loads both. Before timing, the good counts of a small block are checked against a plain
Python evaluation of the definition on Fraction expansions with float64 Gauss measures of the
cylinders. Writes bench/results/goodness.json and goodness.md.

    python bench/bench_goodness.py [--q-max 8000] [--repeats 3]
"""
from __future__ import annotations

import argparse
import datetime
import json
import math
import time
from collections import Counter
from fractions import Fraction
from pathlib import Path

import numba
import numpy as np

from cfsweep.goodness import required_counts, required_words
from cfsweep.kernels.goodness import goodness_block
from cfsweep.kernels.sweep import sweep_block

HERE = Path(__file__).resolve().parent
EMPTY = np.zeros(0, np.uint8)
EPS = [0.05, 0.1, 0.2]
CHUNKS_PER_THREAD = 4


def _digits(p, q):
    x, out = Fraction(p, q), []
    while x:
        x = 1 / x
        a = x.numerator // x.denominator
        out.append(a)
        x -= a
    return out


def _mu(word):
    """Gauss measure of a cylinder from its convergents (float64)."""
    p0, q0, p1, q1 = 1, 0, 0, 1
    for a in word:
        p0, q0, p1, q1 = p1, q1, a * p1 + p0, a * q1 + q0
    ends = sorted((Fraction(p1, q1), Fraction(p1 + p0, q1 + q0)))
    return math.log2((1 + ends[1]) / (1 + ends[0]))


def plain_good(digits, eps, max_k):
    if len(digits) < max_k:
        return False
    for k in range(1, max_k + 1):
        m = len(digits) - k + 1
        counts = Counter(tuple(digits[j:j + k]) for j in range(max(m, 0)))
        if any(w not in counts for w in required_words(eps, k) if len(w) == k):
            return False
        if any(abs(c / m - _mu(w)) > eps for w, c in counts.items()):
            return False
    return True


def validate(q_hi=60):
    for max_k in (1, 2, 3):
        got = goodness_block(2, q_hi, EMPTY, EMPTY, False, max_k, max_k, np.asarray(EPS),
                             required_counts(EPS, max_k), 2).sum(axis=0)
        want = [sum(plain_good(_digits(p, q), e, max_k) for q in range(2, q_hi + 1) for p in range(1, q))
                for e in EPS]
        assert got.tolist() == want, (max_k, got.tolist(), want)


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--q-max", type=int, default=8000, help="largest denominator (100..10**5)")
    ap.add_argument("--repeats", type=int, default=3, help="interleaved timed runs (1..100)")
    args = ap.parse_args(argv)
    if not 100 <= args.q_max <= 10 ** 5:
        ap.error(f"--q-max {args.q_max} is out of range: 100..100000")
    if not 1 <= args.repeats <= 100:
        ap.error(f"--repeats {args.repeats} is out of range: 1..100")
    threads = min(2, numba.config.NUMBA_NUM_THREADS)
    numba.set_num_threads(threads)
    chunks = threads * CHUNKS_PER_THREAD
    eps = np.asarray(EPS)
    required = {k: required_counts(EPS, k) for k in (1, 2, 3)}
    sweep_block(2, 100, EMPTY, EMPTY, False, 32, 1, chunks)
    for k in (1, 2, 3):
        goodness_block(2, 100, EMPTY, EMPTY, False, k, k, eps, required[k], chunks)
    validate()
    best = {}
    good = {}
    for _ in range(args.repeats):
        t = time.perf_counter()
        sweep_block(2, args.q_max, EMPTY, EMPTY, False, 32, 1, chunks)
        dt = time.perf_counter() - t
        best["sweep"] = min(best.get("sweep", 1e9), dt)
        for k in (1, 2, 3):
            t = time.perf_counter()
            out = goodness_block(2, args.q_max, EMPTY, EMPTY, False, k, k, eps, required[k], chunks)
            dt = time.perf_counter() - t
            best[f"good_k{k}"] = min(best.get(f"good_k{k}", 1e9), dt)
            good[k] = out.sum(axis=0).tolist()
    fractions = args.q_max * (args.q_max - 1) // 2
    result = {"date": datetime.datetime.now().isoformat(timespec="seconds"), "q_max": args.q_max,
              "fractions": fractions, "threads": threads, "eps": EPS, "seconds_min": best,
              "good_members": {str(k): v for k, v in good.items()}}
    (HERE / "results").mkdir(exist_ok=True)
    (HERE / "results" / "goodness.json").write_text(json.dumps(result, indent=2) + "\n")
    lines = [f"Goodness pass, {result['date']}: all p/q with q <= {args.q_max} ({fractions:,} fractions), "
             f"{threads} threads, eps {', '.join(map(str, EPS))}, minimum of {args.repeats} runs.", "",
             "| pass | seconds | over the digits-only sweep |", "|---|---:|---:|",
             f"| digits-only sweep (K = 1, cap 32) | {best['sweep']:.2f} | 1.0x |"]
    for k in (1, 2, 3):
        lines.append(f"| goodness, words up to K = {k} | {best[f'good_k{k}']:.2f} | "
                     f"{best[f'good_k{k}'] / best['sweep']:.1f}x |")
    text = "\n".join(lines)
    (HERE / "results" / "goodness.md").write_text(text + "\n")
    print(text)


if __name__ == "__main__":
    main()
