"""What words of partial quotients cost the sweep kernel, per occurrence, against the 1.5x budget.

Times the sweep of all p/q with 2 <= q <= Q (cap 32) with words up to length K = 1, 2 and 3, on 1 and
2 threads (interleaved repeats, minimum and median), and divides the extra time of words by the number
of word occurrences the sweep books: occurrences of length k = sum over rationals of
m = max(0, n - k + 1), read from the kernel's own position sums (and checked against its word sums).
The budget is what words up to k = 3 may cost per occurrence for the whole sweep to take at most 1.5x
the digit-only time. Also reports how often a word repeats inside one rational (the equal pairs
behind sum c**2 - sum c), which is what the per-rational counts of the error-bar sums are for.
Writes bench/results/words.json and words.md.

    python bench/bench_words.py [--q-max 8000] [--repeats 7]
"""
from __future__ import annotations

import argparse
import datetime
import json
import os
import statistics
import time
from pathlib import Path

import numba
import numpy as np

from cfsweep.kernels import sweep
from cfsweep.kernels.sweep_reference import reference_sweep_block_serial, word_offset

HERE = Path(__file__).resolve().parent
CAP = 32
EMPTY = np.zeros(0, np.uint8)


def run_sweep(q_hi, max_k, threads):
    if threads == 1:
        return sweep.sweep_block_serial(2, q_hi, EMPTY, EMPTY, False, CAP, max_k)
    return sweep.sweep_block(2, q_hi, EMPTY, EMPTY, False, CAP, max_k, 2 * threads)


def word_statistics(out, max_k):
    """Per word length k: occurrences (sum m) and equal-word pairs inside rationals ((sum c**2 - sum c) / 2).

    Checks on the way that the word rows of length k add up to the position sum of k (every position
    of a rational holds exactly one word of each length that fits)."""
    word_sums, position_sums = out[0], out[1]
    stats = {}
    for k in range(1, max_k + 1):
        rows = word_sums[word_offset(CAP, k):word_offset(CAP, k + 1)]
        occurrences = int(position_sums[k, 0])
        assert int(rows[:, 0].sum()) == occurrences, (k, "word counts do not add up to the positions")
        stats[k] = {"occurrences": occurrences, "equal_pairs": int((rows[:, 1] - rows[:, 0]).sum()) // 2}
    return stats


def validate(q_hi):
    """The timed kernels agree with each other, and with the plain twin on a small workload."""
    small = 200
    got = run_sweep(small, 3, 1)
    want = reference_sweep_block_serial(2, small, EMPTY, EMPTY, False, CAP, 3)
    for a, b in zip(got, want):
        assert np.array_equal(a, b), "sweep kernel differs from its plain twin"
    outs = {k: run_sweep(q_hi, k, 1) for k in (1, 2, 3)}
    for k in (1, 2):
        rows = word_offset(CAP, k + 1)
        assert np.array_equal(outs[k][0], outs[3][0][:rows]), (k, "word sums differ between K")
        assert np.array_equal(outs[k][3], outs[3][3]), (k, "per-denominator rows differ between K")
    return word_statistics(outs[3], 3)


def nominal_mhz():
    try:
        for line in Path("/proc/cpuinfo").read_text().splitlines():
            if line.startswith("cpu MHz"):
                return float(line.split(":")[1])
    except OSError:
        pass
    return None


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--q-max", type=int, default=8000, help="largest denominator (40..10**6)")
    ap.add_argument("--repeats", type=int, default=7, help="interleaved timed runs per variant (1..1000)")
    args = ap.parse_args(argv)
    if not 40 <= args.q_max <= 10 ** 6:
        ap.error(f"--q-max {args.q_max} is out of range: 40..1000000")
    if not 1 <= args.repeats <= 1000:
        ap.error(f"--repeats {args.repeats} is out of range: 1..1000")
    q_hi = args.q_max
    threads_list = [1, 2] if (os.cpu_count() or 1) >= 2 else [1]

    compile_start = time.perf_counter()
    for th in threads_list:
        numba.set_num_threads(th)
        for k in (1, 2, 3):
            run_sweep(40, k, th)
    compile_seconds = time.perf_counter() - compile_start
    stats = validate(q_hi)

    seconds = {th: {k: [] for k in (1, 2, 3)} for th in threads_list}
    old_threads = numba.get_num_threads()
    try:
        for _ in range(args.repeats):
            for th in threads_list:
                numba.set_num_threads(th)
                for k in (1, 2, 3):
                    t = time.perf_counter()
                    run_sweep(q_hi, k, th)
                    seconds[th][k].append(time.perf_counter() - t)
    finally:
        numba.set_num_threads(old_threads)

    mhz = nominal_mhz()
    occ2, occ3 = stats[2]["occurrences"], stats[3]["occurrences"]
    per_thread = {}
    for th in threads_list:
        best = {k: min(v) for k, v in seconds[th].items()}
        # per occurrence and per core: the threads share the occurrences
        ns = lambda dt, occ: dt / occ * 1e9 * th  # noqa: E731
        entry = {
            "seconds_min": best,
            "seconds_median": {k: statistics.median(v) for k, v in seconds[th].items()},
            "ratio_words3_vs_digits": best[3] / best[1],
            "ratio_words2_vs_digits": best[2] / best[1],
            "ns_per_occurrence_k2": ns(best[2] - best[1], occ2),
            "ns_per_occurrence_k3": ns(best[3] - best[2], occ3),
            "ns_per_occurrence_k2_k3": ns(best[3] - best[1], occ2 + occ3),
            "budget_ns_per_occurrence_for_1_5x": ns(0.5 * best[1], occ2 + occ3),
        }
        if mhz:
            entry["cycles_per_occurrence_k2_k3"] = entry["ns_per_occurrence_k2_k3"] * mhz / 1e3
            entry["budget_cycles_per_occurrence_for_1_5x"] = entry["budget_ns_per_occurrence_for_1_5x"] * mhz / 1e3
        per_thread[str(th)] = entry
    result = {
        "date": datetime.datetime.now().isoformat(timespec="seconds"),
        "workload": {"q_lo": 2, "q_hi": q_hi, "cap": CAP},
        "repeats": args.repeats,
        "word_occurrences": {str(k): v["occurrences"] for k, v in stats.items()},
        "equal_word_pairs_inside_rationals": {str(k): v["equal_pairs"] for k, v in stats.items()},
        "threads": per_thread,
        "nominal_mhz": mhz,
        "compile_seconds": compile_seconds,
    }
    out_dir = HERE / "results"
    out_dir.mkdir(exist_ok=True)
    (out_dir / "words.json").write_text(json.dumps(result, indent=2) + "\n")
    text = markdown(result)
    (out_dir / "words.md").write_text(text + "\n")
    print(text)


def markdown(r):
    w = r["workload"]
    occ = r["word_occurrences"]
    pairs = r["equal_word_pairs_inside_rationals"]
    lines = [f"Words benchmark, {r['date']}: all p/q with q <= {w['q_hi']}, cap {w['cap']}, minimum of "
             f"{r['repeats']} interleaved runs.",
             "",
             "| threads | digits (K=1) | K=2 | K=3 | K=3 / K=1 | ns per word occurrence (k=2,3), per core "
             "| budget for 1.5x |",
             "|---:|---:|---:|---:|---:|---:|---:|"]
    for th, e in r["threads"].items():
        s = e["seconds_min"]
        s = {int(k): v for k, v in s.items()}
        lines.append(f"| {th} | {s[1]:.3f} s | {s[2]:.3f} s | {s[3]:.3f} s | {e['ratio_words3_vs_digits']:.2f}x "
                     f"| {e['ns_per_occurrence_k2_k3']:.2f} | {e['budget_ns_per_occurrence_for_1_5x']:.2f} |")
    lines.append("")
    lines.append(f"Word occurrences: {int(occ['2']):,} of length 2, {int(occ['3']):,} of length 3 "
                 f"(digits: {int(occ['1']):,}). Equal pairs of words inside one rational: "
                 f"{int(pairs['2']):,} (k=2, {int(pairs['2']) / int(occ['2']):.3f} per occurrence), "
                 f"{int(pairs['3']):,} (k=3, {int(pairs['3']) / int(occ['3']):.3f} per occurrence).")
    one = r["threads"]["1"]
    if r.get("nominal_mhz"):
        lines.append(f"At the nominal {r['nominal_mhz']:.0f} MHz, 1 thread: "
                     f"{one['cycles_per_occurrence_k2_k3']:.2f} cycles per occurrence measured, "
                     f"{one['budget_cycles_per_occurrence_for_1_5x']:.2f} allowed for 1.5x.")
    return "\n".join(lines)


if __name__ == "__main__":
    main()
