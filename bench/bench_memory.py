"""Peak memory of whole sweeps against the largest denominator Q.

Usage: python bench/bench_memory.py [--full] [--words K]

Runs `cfsweep sweep --max-den Q --words K` as a child process for several Q (default 2500 ... 20000,
--full adds 40000), each into a fresh temporary directory, and reads the child's own peak resident set
size from os.wait4 (Linux reports it in KiB). Also records the wall time and the number of blocks the
plan made. Results: bench/results/memory.json and memory.md.
"""
import argparse
import datetime
import json
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import pyarrow.parquet as pq

HERE = Path(__file__).resolve().parent


def measure(q_max, words):
    with tempfile.TemporaryDirectory() as tmp:
        out = Path(tmp) / "run"
        cmd = [sys.executable, "-m", "cfsweep", "sweep", "--max-den", str(q_max), "--words", str(words),
               "--out", str(out)]
        # stderr goes to a file: a pipe nobody reads while we wait could fill up and stall the child
        with open(Path(tmp) / "stderr.txt", "w+b") as err:
            t = time.perf_counter()
            child = subprocess.Popen(cmd, stdout=subprocess.DEVNULL, stderr=err)
            _, status, usage = os.wait4(child.pid, 0)
            seconds = time.perf_counter() - t
            err.seek(0)
            message = err.read().decode(errors="replace").strip()
        if os.waitstatus_to_exitcode(status) != 0:
            raise SystemExit(f"sweep of Q = {q_max} failed: {message}")
        blocks = len(list((out / "blocks").glob("*.done.json")))
        # the family "all" holds every p/q with 0 < p < q <= Q: Q(Q - 1)/2 fractions
        members = sum(int(pq.read_table(f, columns=["members"])["members"].to_numpy().sum())
                      for f in (out / "blocks").glob("*.denominators.parquet"))
        if members != q_max * (q_max - 1) // 2:
            raise SystemExit(f"sweep of Q = {q_max} booked {members} fractions, not Q(Q-1)/2")
    return {"q_max": q_max, "peak_rss_mb": usage.ru_maxrss / 1024, "seconds": seconds, "blocks": blocks,
            "fractions": int(members)}


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--full", action="store_true", help="also Q = 40000 (about a minute more)")
    ap.add_argument("--words", type=int, default=3, help="longest word counted (default 3)")
    args = ap.parse_args(argv)
    qs = [2500, 5000, 10000, 20000] + ([40000] if args.full else [])
    measure(200, args.words)  # compiles or loads the kernels before anything is timed
    rows = []
    for q_max in qs:
        rows.append(measure(q_max, args.words))
        r = rows[-1]
        print(f"Q = {q_max:6d}: peak RSS {r['peak_rss_mb']:7.1f} MB, {r['seconds']:6.1f} s, "
              f"{r['blocks']} blocks, {r['fractions']:,} fractions", flush=True)
    result = {"date": datetime.datetime.now().isoformat(timespec="seconds"), "words": args.words,
              "threads": os.cpu_count(), "rows": rows}
    lines = [f"Peak memory of `cfsweep sweep --max-den Q --words {args.words}`, {result['date']}, "
             f"{result['threads']} cores (peak RSS of the child process, from os.wait4).", "",
             "| Q | fractions | blocks | peak RSS (MB) | wall (s) |", "|---:|---:|---:|---:|---:|"]
    lines += [f"| {r['q_max']} | {r['fractions']:,} | {r['blocks']} | {r['peak_rss_mb']:.1f} | {r['seconds']:.1f} |"
              for r in rows]
    out_dir = HERE / "results"
    out_dir.mkdir(exist_ok=True)
    (out_dir / "memory.json").write_text(json.dumps(result, indent=2) + "\n")
    (out_dir / "memory.md").write_text("\n".join(lines) + "\n")
    print("\n".join(lines))


if __name__ == "__main__":
    main()
