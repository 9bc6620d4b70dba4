"""Samples per second of the pair sampler for a few families at q ~ 1e12 and q ~ 1e18.

Run: ``python bench/bench_sampling.py [--seconds 1.0] [--out bench/results/sampling.json]``.

Every configuration is validated before it is timed (a sample of the drawn pairs is checked for family
membership with sympy and math.gcd), compile time is measured separately, and each figure is the best
of three timed repetitions at 1 thread and at all threads, side by side in one run.
"""
from __future__ import annotations

import argparse
import json
import math
import os
import platform
import time
from pathlib import Path

import numba
import numpy as np
import sympy

from cfsweep.kernels import sampling as ks
from cfsweep.kernels._jit import UNCACHED

A, S, P = ks.CLASS_ANY, ks.CLASS_SQUAREFREE, ks.CLASS_PRIME
FAMILIES = {  # canonical family text -> (coprime_only, num_class, den_class)
    "all": (False, A, A),
    "reduced": (True, A, A),
    "all,num=squarefree,den=squarefree": (False, S, S),
    "reduced,den=squarefree": (True, A, S),
    "all,den=prime": (False, A, P),
    "all,num=prime,den=prime": (False, P, P),
}
RANGES = {"1e12": (10 ** 12, 2 * 10 ** 12), "1e18": (10 ** 18, 2 * 10 ** 18)}
KEY = np.array([0x5EED, 0xC0FFEE], np.uint64)


def run(n, lo, hi, family, table, first=0):
    out_p = np.zeros(n, np.uint64)
    out_q = np.zeros(n, np.uint64)
    attempts = ks.sample_pairs(KEY, np.uint64(1), np.uint64(first), n, np.uint64(lo), np.uint64(hi),
                               *family, table, out_p, out_q)
    return out_p, out_q, int(attempts)


def squarefree_ref(n):
    return all(e == 1 for e in sympy.factorint(n).values())


def validate(out_p, out_q, lo, hi, family, checks=40):
    coprime, num_class, den_class = family
    for p, q in list(zip(out_p.tolist(), out_q.tolist()))[:checks]:
        assert 1 <= p < q and lo <= q < hi, (p, q)
        for value, cls in ((p, num_class), (q, den_class)):
            if cls == S:
                assert squarefree_ref(value), value
            elif cls == P:
                assert sympy.isprime(value), value
        if coprime:
            assert math.gcd(p, q) == 1, (p, q)


def best_rate(n, lo, hi, family, table, repeats=3):
    best = None
    attempts = 0
    for r in range(repeats):
        start = time.perf_counter()
        _, _, attempts = run(n, lo, hi, family, table, first=n * (r + 1))
        elapsed = time.perf_counter() - start
        best = elapsed if best is None else min(best, elapsed)
    return n / best, attempts


# Uncached: Numba's cache does not notice changes in the kernels these loops inline.
@numba.njit(**UNCACHED)
def _prime_test_loop(values):
    found = 0
    for i in range(values.shape[0]):
        if ks.is_prime_u64(values[i]):
            found += 1
    return found


@numba.njit(**UNCACHED)
def _squarefree_test_loop(values, table):
    found = 0
    for i in range(values.shape[0]):
        if ks.is_squarefree_u64(values[i], table):
            found += 1
    return found


def primitive_rates(table):
    rng = np.random.default_rng(7)
    out = {}
    for label, (lo, hi) in RANGES.items():
        values = rng.integers(lo, hi, 20000, dtype=np.uint64)
        primes = np.array([sympy.nextprime(int(v)) for v in values[:2000]], np.uint64)
        _prime_test_loop(values[:10])
        _squarefree_test_loop(values[:10], table)
        assert _prime_test_loop(primes) == primes.shape[0]
        sf = _squarefree_test_loop(values[:200], table)
        assert sf == sum(squarefree_ref(int(v)) for v in values[:200])
        rates = {}
        for name, fn, arr in (("is_prime_u64 random", lambda a: _prime_test_loop(a), values),
                              ("is_prime_u64 primes", lambda a: _prime_test_loop(a), primes),
                              ("is_squarefree_u64 random", lambda a: _squarefree_test_loop(a, table),
                               values)):
            start = time.perf_counter()
            fn(arr)
            rates[name + " per second"] = arr.shape[0] / (time.perf_counter() - start)
        out[label] = rates
    return out


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--seconds", type=float, default=1.0, help="target seconds per timing")
    parser.add_argument("--out", default=str(Path(__file__).parent / "results" / "sampling.json"))
    args = parser.parse_args()

    start = time.perf_counter()
    table = ks.divisor_table(ks.MAX_CUBE_ROOT_U64)
    table_seconds = time.perf_counter() - start
    start = time.perf_counter()
    run(4, 10, 100, (True, S, P), table)
    compile_seconds = time.perf_counter() - start

    load_before = os.getloadavg()
    max_threads = numba.config.NUMBA_NUM_THREADS
    thread_counts = sorted({1, max_threads})
    results = []
    before = numba.get_num_threads()
    try:
        for range_label, (lo, hi) in RANGES.items():
            for name, family in FAMILIES.items():
                numba.set_num_threads(1)
                probe = 64
                while True:
                    t0 = time.perf_counter()
                    out_p, out_q, _ = run(probe, lo, hi, family, table)
                    if time.perf_counter() - t0 > 0.05 or probe >= 1 << 24:
                        break
                    probe *= 4
                validate(out_p, out_q, lo, hi, family)
                rate_probe = probe / max(time.perf_counter() - t0, 1e-9)
                n = max(256, int(rate_probe * args.seconds))
                row = {"family": name, "q_range": [lo, hi], "q_label": range_label, "samples": n}
                for threads in thread_counts:
                    numba.set_num_threads(threads)
                    rate, attempts = best_rate(n, lo, hi, family, table)
                    row[f"samples_per_second_{threads}_threads"] = round(rate, 1)
                    row["attempts_per_sample"] = round(attempts / n, 2)
                results.append(row)
                print(json.dumps(row))
    finally:
        numba.set_num_threads(before)

    payload = {
        "benchmark": "sampling",
        "command": "python bench/bench_sampling.py --seconds %g" % args.seconds,
        "machine": {"cpus": os.cpu_count(), "platform": platform.platform(),
                    "python": platform.python_version(), "numba": numba.__version__},
        "thread_counts": thread_counts,
        # Other jobs share the machine; a load above the core count depresses the multi-thread figures.
        "load_average_1min_before_after": [round(load_before[0], 2), round(os.getloadavg()[0], 2)],
        "divisor_table_seconds": round(table_seconds, 3),
        "first_call_seconds_incl_compile_or_cache_load": round(compile_seconds, 3),
        "families": results,
        "primitives": primitive_rates(table),
        "notes": "best of 3 repetitions; each family validated against sympy before timing",
    }
    out = Path(args.out)
    out.parent.mkdir(parents=True, exist_ok=True)
    out.write_text(json.dumps(payload, indent=2) + "\n")
    print(f"wrote {out}")


if __name__ == "__main__":
    main()
