"""Side-by-side sweep benchmark: every implementation on the same workload, validated, then timed.

Usage: python bench/run.py [--quick] [--q-max Q] [--repeats R]

Workload: all p/q with 2 <= q <= Q (quick: Q = 4000, full: Q = 20000), cap 32. Every implementation is
first checked against the cfsweep kernel (identical digit histogram and length histogram, and the
per-denominator rows where it produces them) on its first timed run, and timed as the median of R
runs after a warm-up call, so compile time is kept out and reported separately. The R repeats are
interleaved (every implementation once per repeat) so that all see the same load of the shared machine. Pure Python runs on a small sub-range of
denominators and is extrapolated per partial quotient. Figures are million partial quotients per
second (MPQ/s). Results go to bench/results/latest.json and latest.md, and to quick.* or full.*.
"""
import argparse
import ctypes
import datetime
import json
import os
import platform
import resource
import statistics
import subprocess
import sys
import time
from pathlib import Path

import numba
import numpy as np

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))

from cfsweep.kernels import sweep  # noqa: E402
from cfsweep.kernels._jit import PARALLEL, SERIAL  # noqa: E402

# Not cached: this file runs as __main__ and is imported by the tests, and Numba's cache would hand
# one of them the other's module references. Its compile time is reported separately anyway.
BENCH_SERIAL = {**SERIAL, "cache": False}
BENCH_PARALLEL = {**PARALLEL, "cache": False}

CAP = 32
EMPTY = np.zeros(0, np.uint8)


# ---------------------------------------------------------------- implementations under test
def python_sweep(q_lo, q_hi, cap):
    hist = [0] * cap
    lengths = [0] * 129
    for q in range(q_lo, q_hi + 1):
        for p in range(1, q):
            x, y, n = q, p, 0
            while y:
                a, r = divmod(x, y)
                hist[min(a, cap) - 1] += 1
                n += 1
                x, y = y, r
            lengths[n] += 1
    return np.array(hist, np.int64), np.array(lengths, np.int64)


def numpy_sweep(q_lo, q_hi, cap):
    hist = np.zeros(cap, np.int64)
    lengths = np.zeros(129, np.int64)
    for q in range(q_lo, q_hi + 1):
        y = np.arange(1, q, dtype=np.int64)
        x = np.full(q - 1, q, np.int64)
        n = np.zeros(q - 1, np.int64)
        while x.size:
            a, r = np.divmod(x, y)
            hist += np.bincount(np.minimum(a, cap) - 1, minlength=cap)
            n += 1
            alive = r != 0
            lengths += np.bincount(n[~alive], minlength=129)
            x, y, n = y[alive], r[alive], n[alive]
    return hist, lengths


@numba.njit(**BENCH_SERIAL)
def _plain_chunk(q_first, q_hi, step, cap, hist, lengths):
    for q in range(q_first, q_hi + 1, step):
        for p in range(1, q):
            x = np.uint32(q)
            y = np.uint32(p)
            n = 0
            while y != 0:
                a = x // y
                r = x - a * y
                hist[min(a, np.uint32(cap)) - np.uint32(1)] += 1
                n += 1
                x = y
                y = r
            lengths[n] += 1


@numba.njit(**BENCH_PARALLEL)
def numba_plain_sweep(q_lo, q_hi, cap, n_chunks):
    hs = np.zeros((n_chunks, cap), np.int64)
    ls = np.zeros((n_chunks, 129), np.int64)
    for c in numba.prange(n_chunks):
        _plain_chunk(q_lo + c, q_hi, n_chunks, cap, hs[c], ls[c])
    return hs.sum(axis=0), ls.sum(axis=0)


def build_c(build=HERE / "build"):
    """Compile bench/c/cfref.c into ``build``; returns (library, command, vector ISA seen in the
    assembly, SIMD reference compiled in: "avx512", "avx2" or "none")."""
    build = Path(build)
    build.mkdir(parents=True, exist_ok=True)
    lib = build / "cfref.so"
    cmd = ["gcc", "-O3", "-march=native", "-fopenmp", "-shared", "-fPIC", "-o", str(lib),
           str(HERE / "c" / "cfref.c")]
    subprocess.run(cmd, check=True)
    asm = subprocess.run(["gcc", "-O3", "-march=native", "-fopenmp", "-S", "-o", "-",
                          str(HERE / "c" / "cfref.c")], check=True, capture_output=True, text=True).stdout
    isa = "AVX-512 (zmm)" if "zmm" in asm else "AVX2 (ymm)" if "ymm" in asm else "SSE"
    dll = ctypes.CDLL(str(lib))
    dll.cf_simd_isa.restype = ctypes.c_char_p
    simd = dll.cf_simd_isa().decode()
    p64 = ctypes.POINTER(ctypes.c_int64)
    for name in ("cf_plain", "cf_lockstep"):
        getattr(dll, name).argtypes = [ctypes.c_int64, ctypes.c_int64, ctypes.c_int64, ctypes.c_int,
                                       p64, p64, p64]
    if simd != "none":
        dll.cf_simd.argtypes = [ctypes.c_int64, ctypes.c_int64, ctypes.c_int64, ctypes.c_int, ctypes.c_int,
                                p64, p64, p64]
    return dll, " ".join(cmd), isa, simd


def c_runner(dll, name, *extra):
    fn = getattr(dll, name)

    def run(q_lo, q_hi, cap, threads):
        hist = np.zeros(cap, np.int64)
        lengths = np.zeros(129, np.int64)
        rows = np.zeros((q_hi - q_lo + 1, 6), np.int64)
        p = lambda a: a.ctypes.data_as(ctypes.POINTER(ctypes.c_int64))  # noqa: E731
        fn(q_lo, q_hi, cap, threads, *extra, p(hist), p(lengths), p(rows))
        return hist, lengths, rows
    return run


def c_runners(dll, simd):
    """Name -> runner of every C reference in the library (the SIMD pair only if it was compiled in)."""
    runners = {"c_plain": c_runner(dll, "cf_plain"), "c_lockstep": c_runner(dll, "cf_lockstep")}
    if simd != "none":
        runners[f"c_{simd}"] = c_runner(dll, "cf_simd", 0)
        runners[f"c_{simd}_mirror"] = c_runner(dll, "cf_simd", 1)
    return runners


def kernel_runner(max_k):
    def run(q_lo, q_hi, cap, threads):
        if threads == 1:
            out = sweep.sweep_block_serial(q_lo, q_hi, EMPTY, EMPTY, False, cap, max_k)
        else:
            out = sweep.sweep_block(q_lo, q_hi, EMPTY, EMPTY, False, cap, max_k, 2 * threads)
        return out[0][:cap, 0], out[2], out[3]
    return run


# ---------------------------------------------------------------- harness
def timed(fn, repeats):
    times = []
    for _ in range(repeats):
        t = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t)
    return statistics.median(times)


def cpu_info():
    model, flags = platform.processor(), ""
    try:
        for line in open("/proc/cpuinfo"):
            if line.startswith("model name") and not model.strip():
                model = line.split(":", 1)[1].strip()
            if line.startswith("model name"):
                model = line.split(":", 1)[1].strip()
            if line.startswith("flags"):
                flags = line.split(":", 1)[1].strip()
                break
    except OSError:
        pass
    simd = [f for f in flags.split() if f.startswith(("avx", "sse4", "fma"))]
    return {"model": model, "flags": simd, "cores": os.cpu_count()}


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true",
                    help="small workload (q <= 4000): about 30 s once the kernels are compiled; a first run "
                         "also compiles them (about a minute, reported as compile_seconds)")
    ap.add_argument("--q-max", type=int, default=None, help="largest denominator of the workload")
    ap.add_argument("--repeats", type=int, default=None, help="timed runs per implementation (median)")
    args = ap.parse_args(argv)
    q_hi = args.q_max or (4000 if args.quick else 20000)
    repeats = args.repeats or (5 if args.quick else 3)
    q_lo = 2
    threads_list = [1, 2] if (os.cpu_count() or 1) >= 2 else [1]

    compile_seconds = {}
    t = time.perf_counter()
    dll, c_cmd, c_isa, c_simd = build_c()
    if c_simd == "none":
        print("this CPU has neither AVX-512 nor AVX2 + FMA: the SIMD C reference is left out", flush=True)
    compile_seconds["c (gcc)"] = time.perf_counter() - t

    impls = {
        "numba_plain": lambda lo, hi, cap, th: numba_plain_sweep(lo, hi, cap, 2 * th),
        "cfsweep_k1": kernel_runner(1),
        "cfsweep_k2": kernel_runner(2),
        "cfsweep_k3": kernel_runner(3),
        **c_runners(dll, c_simd),
    }
    for name, fn in impls.items():
        t = time.perf_counter()
        for th in threads_list:
            numba.set_num_threads(th)
            fn(2, 40, CAP, th)
        compile_seconds[name] = time.perf_counter() - t
    numba.set_num_threads(max(threads_list))

    # reference answer: the cfsweep kernel, itself tested against the plain kernel and Fraction
    ref = sweep.sweep_block(q_lo, q_hi, EMPTY, EMPTY, False, CAP, 1, 4)
    ref_hist, ref_len, ref_rows = ref[0][:CAP, 0], ref[2], ref[3]
    total_pq = int(ref_rows[:, 1].sum())

    # Interleaved timing: every repeat runs every implementation once per thread count, so that all of
    # them see the same (shared, changing) machine load; the first repeat's output is also validated.
    seconds = {name: {str(th): [] for th in threads_list} for name in impls}
    load_seen = [os.getloadavg()[0]]
    old_threads = numba.get_num_threads()
    try:
        for rep in range(repeats):
            for th in threads_list:
                numba.set_num_threads(th)
                for name, fn in impls.items():
                    t = time.perf_counter()
                    out = fn(q_lo, q_hi, CAP, th)
                    seconds[name][str(th)].append(time.perf_counter() - t)
                    if rep == 0:
                        assert np.array_equal(out[0], ref_hist), (name, th, "digit histogram differs")
                        assert np.array_equal(out[1][:len(ref_len)], ref_len), (name, th, "lengths differ")
                        if len(out) > 2:
                            assert np.array_equal(out[2], ref_rows), (name, th, "per-denominator rows differ")
            load_seen.append(os.getloadavg()[0])
            print(f"repeat {rep + 1}/{repeats} done, load {load_seen[-1]:.2f}", flush=True)
    finally:
        numba.set_num_threads(old_threads)
    pq_per_s = {name: {th: total_pq / statistics.median(v) / 1e6 for th, v in per.items()}
                for name, per in seconds.items()}
    for name, per in pq_per_s.items():
        print(f"{name:16s} " + "  ".join(f"{th}t {v:9.1f} MPQ/s" for th, v in per.items()), flush=True)

    # small sub-ranges for the slow ones, extrapolated per partial quotient
    sub_lo = max(q_lo, q_hi - (60 if args.quick else 150))
    sub = sweep.sweep_block_serial(sub_lo, q_hi, EMPTY, EMPTY, False, CAP, 1)
    sub_pq = int(sub[3][:, 1].sum())
    for name, fn, lo in (("python", python_sweep, q_hi - 3), ("numpy", numpy_sweep, sub_lo)):
        exp = sweep.sweep_block_serial(lo, q_hi, EMPTY, EMPTY, False, CAP, 1)
        out = fn(lo, q_hi, CAP)
        assert np.array_equal(out[0], exp[0][:CAP, 0]) and np.array_equal(out[1], exp[2]), name
        sec = timed(lambda: fn(lo, q_hi, CAP), 1 if name == "python" else repeats)
        pq_per_s[name] = {"1": int(exp[3][:, 1].sum()) / sec / 1e6}
        print(f"{name:12s} 1t {pq_per_s[name]['1']:9.2f} MPQ/s (q in [{lo}, {q_hi}])", flush=True)
    del sub_pq

    c_names = [n for n in pq_per_s if n.startswith("c_")]
    c_best = {th: max(pq_per_s[n][th] for n in c_names) for th in pq_per_s["c_plain"]}
    c_best_name = {th: max(c_names, key=lambda n: pq_per_s[n][th]) for th in pq_per_s["c_plain"]}
    # the digit-only C references without the mirror trick, for the ratio of equal Euclid work
    c_nomirror = {th: max(pq_per_s[n][th] for n in c_names if "mirror" not in n) for th in c_best}
    k1 = pq_per_s["cfsweep_k1"]
    result = {
        "date": datetime.datetime.now().isoformat(timespec="seconds"),
        "mode": "quick" if args.quick else "full",
        "workload": {"q_lo": q_lo, "q_hi": q_hi, "cap": CAP, "partial_quotients": total_pq,
                     "fractions": int(ref_len.sum())},
        "repeats": repeats,
        "pq_per_s": pq_per_s,
        "ratio_kernel_vs_c_best_1t": k1["1"] / c_best["1"],
        "ratio_kernel_vs_c_best_2t": k1["2"] / c_best["2"] if "2" in k1 else None,
        "c_best_name": c_best_name,
        "ratio_kernel_vs_c_without_mirror": {th: k1[th] / c_nomirror[th] for th in k1},
        "sweep_seconds": {name: {th: statistics.median(v) for th, v in per.items()}
                          for name, per in seconds.items() if name.startswith("cfsweep")},
        "load_average_1min": load_seen,
        "ratio_words3_vs_digits": {th: k1[th] / pq_per_s["cfsweep_k3"][th] for th in k1},
        "scaling_2t": {n: v["2"] / v["1"] for n, v in pq_per_s.items() if "2" in v},
        "peak_rss_mb": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024,
        "cpu": cpu_info(),
        "c_build": c_cmd,
        "c_instruction_set": c_isa,
        "c_simd_reference": c_simd,
        "numba": numba.__version__,
        "numba_threading_layer": numba.threading_layer(),
        "compile_seconds": compile_seconds,
    }
    out_dir = HERE / "results"
    out_dir.mkdir(exist_ok=True)
    for stem in ("latest", result["mode"]):
        (out_dir / f"{stem}.json").write_text(json.dumps(result, indent=2) + "\n")
        (out_dir / f"{stem}.md").write_text(markdown(result) + "\n")
    print(markdown(result))


SIMD_NAMES = {"avx512": "AVX-512", "avx2": "AVX2 + FMA"}


def markdown(r):
    w = r["workload"]
    lines = [f"Sweep benchmark, {r['mode']} mode, {r['date']}: all p/q with q <= {w['q_hi']} "
             f"({w['fractions']:,} fractions, {w['partial_quotients']:,} partial quotients), cap {w['cap']}.",
             f"Machine: {r['cpu']['model']}, {r['cpu']['cores']} cores (shared; medians of {r['repeats']} runs). "
             f"C: `{r['c_build'].split(' -o')[0]}`, {r['c_instruction_set']}.", "",
             "| implementation | MPQ/s, 1 thread | MPQ/s, 2 threads | 2-thread scaling |",
             "|---|---:|---:|---:|"]
    for name, v in r["pq_per_s"].items():
        two = f"{v['2']:.1f}" if "2" in v else "-"
        sc = f"{r['scaling_2t'][name]:.2f}x" if name in r["scaling_2t"] else "-"
        lines.append(f"| {name} | {v['1']:.2f} | {two} | {sc} |")
    lines += ["", f"cfsweep_k1 / best C ({', '.join(f'{t} thr: {n}' for t, n in r['c_best_name'].items())}): "
              f"{r['ratio_kernel_vs_c_best_1t']:.2f} (1 thread), "
              f"{(r['ratio_kernel_vs_c_best_2t'] or 0):.2f} (2 threads); against the best C without the "
              "mirror trick: " + ", ".join(f"{v:.2f} ({t} thr)" for t, v in r["ratio_kernel_vs_c_without_mirror"].items())
              + ". "
              "Time of words k<=3 over digits only: "
              + ", ".join(f"{v:.2f}x ({t} thr)" for t, v in r["ratio_words3_vs_digits"].items())
              + f". Peak RSS {r['peak_rss_mb']:.0f} MB (this process, with any kernel compiled in it: "
              + ", ".join(f"{n} {t:.1f} s" for n, t in r["compile_seconds"].items() if t >= 1.0)
              + "; `bench/bench_memory.py` measures whole sweeps).",
              "Wall time of one sweep of this workload (median): "
              + "; ".join(f"{n} " + ", ".join(f"{s:.2f} s ({t} thr)" for t, s in v.items())
                          for n, v in r["sweep_seconds"].items()) + ".",
              "1-minute load average seen during the timed runs: "
              + ", ".join(f"{x:.1f}" for x in r["load_average_1min"]) + " (2 cores, shared machine).",
              "cfsweep_kK: sweep_block with words up to length K and the error-bar sums (even k1 also sums c**2 "
              "and c*m per digit); the C references and numba_plain compute the digit histogram and lengths "
              "(C also the per-denominator rows) only. "
              + (f"c_{r['c_simd_reference']}: {SIMD_NAMES[r['c_simd_reference']]} intrinsics, 64 float32 lanes, "
                 f"packed counters; c_{r['c_simd_reference']}_mirror: the same plus the mirror trick of the "
                 "cfsweep kernel (expands only p < q/2, from the second partial quotient)."
                 if r["c_simd_reference"] != "none" else "No SIMD C reference: the CPU has neither AVX-512 "
                 "nor AVX2 + FMA.")]
    return "\n".join(lines)


if __name__ == "__main__":
    main()
