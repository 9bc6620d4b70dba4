"""Timings of the exact lattice counter, and its speed-up over enumeration.

Usage: python bench/bench_exact.py [--full] [--threads 2]
Writes bench/results/exact.json and bench/results/exact.md. Compile (or cache-load) time is measured on
a tiny warm-up call and reported separately; every timed figure excludes it. Output is validated
before timing: the exact counts at the enumeration Q are compared with the sweep kernel.
"""
from __future__ import annotations

import argparse
import json
import math
import os
import platform
import time

import numba
import numpy as np

from cfsweep.exact import _Grid, exact_counts
from cfsweep.kernels.sweep import sweep_block

CAP = 21  # digits 1..20, bucket d > 20
HERE = os.path.dirname(os.path.abspath(__file__))


def timed(fn):
    t = time.perf_counter()
    out = fn()
    return out, time.perf_counter() - t


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--full", action="store_true", help="also Q = 1e8")
    ap.add_argument("--threads", type=int, default=2)
    ap.add_argument("--enum-q", type=int, default=20000)
    args = ap.parse_args()
    previous = numba.get_num_threads()
    numba.set_num_threads(args.threads)
    try:
        _, compile_s = timed(lambda: (exact_counts(2000, cap=CAP, threads=args.threads),
                                      exact_counts(2000, cap=CAP, threads=1),
                                      sweep_block(2, 100, np.zeros(0, np.uint8), np.zeros(0, np.uint8), False, CAP, 1,
                                                  args.threads)))
        # Enumeration vs exact at a Q where both run; validated first.
        qe = args.enum_q
        empty = np.zeros(0, np.uint8)
        (sweeps, enum_s) = timed(lambda: [sweep_block(2, qe, empty, empty, c, CAP, 1, args.threads) for c in (False, True)])
        exact_e, exact_e_s = timed(lambda: exact_counts(qe, cap=CAP, threads=args.threads))
        for (ws, ps, _, _), name in zip(sweeps, ("all", "reduced")):
            fc = exact_e.families[name]
            assert fc.total_length == int(ps[1, 0])
            assert [fc.digit_counts[d] for d in range(1, CAP)] == [int(v) for v in ws[:CAP - 1, 0]]
            assert fc.bucket == int(ws[CAP - 1, 0])
        rows = []
        qs = [10 ** 6, 10 ** 7] + ([10 ** 8] if args.full else [])
        for q in qs:
            res, full_s = timed(lambda: exact_counts(q, cap=CAP, threads=args.threads))
            _, d1_s = timed(lambda: _Grid(q, args.threads).word((1,)))
            fc = res.families["all"]
            rows.append(dict(max_den=q, full_table_s=round(full_s, 3), digit1_s=round(d1_s, 3),
                             total_length_all=fc.total_length,
                             total_length_reduced=res.families["reduced"].total_length))
        top = rows[-1]
        qt = top["max_den"]

        def q2logq(q):
            return q * q * math.log(q)

        def qlog2q(q):
            return q * math.log(q) ** 2

        enum_proj_1e8 = enum_s * q2logq(1e8) / q2logq(qe)
        exact_1e8 = top["full_table_s"] * (qlog2q(1e8) / qlog2q(qt))
        summary = dict(
            machine=platform.processor() or platform.machine(), cpus=os.cpu_count(), threads=args.threads,
            numba=numba.__version__, compile_or_cache_load_s=round(compile_s, 3),
            enumeration=dict(max_den=qe, sweep_both_families_s=round(enum_s, 3), exact_same_numbers_s=round(exact_e_s, 3),
                             speedup=round(enum_s / exact_e_s, 1)),
            rows=rows,
            projection_1e8=dict(enumeration_s=round(enum_proj_1e8), exact_s=round(exact_1e8, 1),
                                exact_measured=qt == 10 ** 8, speedup=round(enum_proj_1e8 / exact_1e8)),
        )
    finally:
        numba.set_num_threads(previous)
    os.makedirs(os.path.join(HERE, "results"), exist_ok=True)
    with open(os.path.join(HERE, "results", "exact.json"), "w") as fh:
        json.dump(summary, fh, indent=2)
    lines = ["# Exact counter timings", "",
             f"{summary['threads']} threads, numba {summary['numba']}, shared machine (noisy). Full table = total length, "
             "digits 1..20, bucket > 20, both families. Compile/cache-load time (excluded below): "
             f"{summary['compile_or_cache_load_s']} s.", "",
             "| Q | full table (s) | digit 1 alone (s) |", "|---|---|---|"]
    lines += [f"| {r['max_den']:.0e} | {r['full_table_s']} | {r['digit1_s']} |" for r in rows]
    e = summary["enumeration"]
    p = summary["projection_1e8"]
    lines += ["", f"Enumeration (sweep_block, both families) at Q = {e['max_den']}: {e['sweep_both_families_s']} s; "
              f"exact, same numbers: {e['exact_same_numbers_s']} s (x{e['speedup']}).",
              f"Projected to Q = 1e8 (Q^2 log Q): enumeration {p['enumeration_s']} s; exact "
              f"{'measured' if p['exact_measured'] else 'projected (Q log^2 Q)'} {p['exact_s']} s: x{p['speedup']}.", ""]
    with open(os.path.join(HERE, "results", "exact.md"), "w") as fh:
        fh.write("\n".join(lines))
    print("\n".join(lines))


if __name__ == "__main__":
    main()
