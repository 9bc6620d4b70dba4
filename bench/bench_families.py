"""Sieve and sweep timings per family (issue: families of rationals).

For each family at Q (default 20000): time and memory of the membership sieves, time of the independent
member count (the reducer's check), and the sweep kernel time (digits only, K = 1, cap 32, all threads,
as many chunks as a sweep uses), compile time kept out (a warm-up call on a small block first). Writes
bench/results/families.json and .md.

    python bench/bench_families.py [--max-den 20000] [--repeats 3]
"""
from __future__ import annotations

import argparse
import json
import os
import statistics
import time
from pathlib import Path

import numba

from cfsweep.families import expected_members, parse_family
from cfsweep.blocks import KERNEL_CHUNKS_PER_THREAD
from cfsweep.kernels.sweep import sweep_block

FAMILIES = ["all", "reduced", "squarefree", "prime", "reduced,den=squarefree", "num=squarefree,den=prime"]


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--max-den", type=int, default=20000)
    ap.add_argument("--repeats", type=int, default=3)
    args = ap.parse_args()
    q = args.max_den
    threads = numba.get_num_threads()
    rows = []
    for text in FAMILIES:
        fam = parse_family(text)
        num_ok, den_ok, cop = fam.membership(200)
        # compile / load the cache outside the timing
        sweep_block(2, 200, num_ok, den_ok, cop, 32, 1, threads * KERNEL_CHUNKS_PER_THREAD)
        sieve_s, count_s, sweep_s = [], [], []
        for _ in range(args.repeats):
            t0 = time.perf_counter()
            num_ok, den_ok, cop = fam.membership(q)
            sieve_s.append(time.perf_counter() - t0)
            t0 = time.perf_counter()
            expected = sum(expected_members(fam, 2, q))
            count_s.append(time.perf_counter() - t0)
            t0 = time.perf_counter()
            out = sweep_block(2, q, num_ok, den_ok, cop, 32, 1, threads * KERNEL_CHUNKS_PER_THREAD)
            sweep_s.append(time.perf_counter() - t0)
        members = int(out[3][:, 0].sum())
        assert members == expected, (text, members, expected)  # validate before reporting
        rows.append({
            "family": fam.canonical, "members": members, "partial_quotients": int(out[3][:, 1].sum()),
            "sieve_seconds": statistics.median(sieve_s), "sieve_bytes": int(num_ok.nbytes + den_ok.nbytes),
            "count_seconds": statistics.median(count_s), "sweep_seconds": statistics.median(sweep_s),
        })
    result = {"max_den": q, "threads": threads, "date": time.strftime("%Y-%m-%d %H:%M"),
              "load_average": os.getloadavg(), "rows": rows}
    out_dir = Path(__file__).parent / "results"
    out_dir.mkdir(exist_ok=True)
    (out_dir / "families.json").write_text(json.dumps(result, indent=2) + "\n")
    lines = [f"Families at Q = {q}, {threads} threads, {result['date']} (load {result['load_average'][0]:.1f}); "
             "sweep = digits only (K = 1)", "",
             "| family | members | partial quotients | sieve s | sieve bytes | member count s | sweep s |",
             "|---|---:|---:|---:|---:|---:|---:|"]
    for r in rows:
        lines.append(f"| {r['family']} | {r['members']:,} | {r['partial_quotients']:,} | {r['sieve_seconds']:.4f} | "
                     f"{r['sieve_bytes']:,} | {r['count_seconds']:.3f} | {r['sweep_seconds']:.2f} |")
    (out_dir / "families.md").write_text("\n".join(lines) + "\n")
    print("\n".join(lines))


if __name__ == "__main__":
    main()
