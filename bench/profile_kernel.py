"""Where the sweep kernel spends its time: samples of the JIT-compiled code, by address, disassembled.

Usage: python bench/profile_kernel.py [--q-max Q] [--words K] [--runs R] [--out FILE]

Numba's machine code has no symbols that perf can name, so this script profiles itself: it compiles and
runs sweep_block_serial once, starts `perf record -e cpu-clock` on its own process, runs the sweep R
more times, then takes the address range that holds most samples (the compiled kernel), copies that
code out of its own memory and disassembles it with objdump, each instruction prefixed by its share of
all samples. It prints the shares of 256-byte address buckets above 0.8%, in address order, and
writes the annotated disassembly to FILE (default bench/build/kernel-profile.txt).
Needs perf (Debian: linux-perf) and objdump (binutils); cpu-clock sampling works without hardware
counters, also on virtual machines. A sample lands on the instruction after the one that waited, so
read the shares as "around here".
"""
import argparse
import collections
import ctypes
import os
import shutil
import signal
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

from cfsweep.kernels import sweep

HERE = Path(__file__).resolve().parent
CAP = 32
EMPTY = np.zeros(0, np.uint8)
# samples further apart than this belong to different code regions
REGION_GAP = 65536


def hottest_region(samples):
    """The run of sampled addresses without gaps above REGION_GAP that holds the most samples."""
    addresses = sorted(samples)
    regions, current = [], [addresses[0]]
    for address in addresses[1:]:
        if address - current[-1] > REGION_GAP:
            regions.append(current)
            current = [address]
        else:
            current.append(address)
    regions.append(current)
    best = max(regions, key=lambda region: sum(samples[a] for a in region))
    return best[0], best[-1]


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--q-max", type=int, default=5000, help="largest denominator (2..2**24)")
    parser.add_argument("--words", type=int, default=1, help="longest word length, 1..4")
    parser.add_argument("--runs", type=int, default=8, help="sweeps while sampling, 1..1000")
    parser.add_argument("--out", type=Path, default=HERE / "build" / "kernel-profile.txt")
    args = parser.parse_args(argv)
    for name, value, lo, hi in (("--q-max", args.q_max, 2, 2 ** 24), ("--words", args.words, 1, 4),
                                ("--runs", args.runs, 1, 1000)):
        if not lo <= value <= hi:
            print(f"error: {name} {value} is outside {lo}..{hi}", file=sys.stderr)
            return 2
    for tool in ("perf", "objdump"):
        if shutil.which(tool) is None:
            print(f"error: {tool} not found (Debian packages: linux-perf, binutils)", file=sys.stderr)
            return 2

    def run():
        sweep.sweep_block_serial(2, args.q_max, EMPTY, EMPTY, False, CAP, args.words)

    run()  # compile, so that compilation is not sampled
    with tempfile.TemporaryDirectory() as tmp:
        data = os.path.join(tmp, "perf.data")
        perf = subprocess.Popen(["perf", "record", "-e", "cpu-clock", "-F", "20000", "-p", str(os.getpid()),
                                 "-o", data], stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
        time.sleep(1.0)  # perf attaches asynchronously
        for _ in range(args.runs):
            run()
        perf.send_signal(signal.SIGINT)
        _, perf_err = perf.communicate()
        if perf.returncode not in (0, -signal.SIGINT) or not os.path.exists(data):
            print(f"error: perf record failed: {perf_err.decode(errors='replace').strip()[:300]}",
                  file=sys.stderr)
            return 2
        script = subprocess.run(["perf", "script", "-i", data, "-F", "ip"], capture_output=True, text=True)
    samples = collections.Counter(int(word, 16) for word in script.stdout.split())
    total = sum(samples.values())
    if total == 0:
        print("error: perf recorded no samples", file=sys.stderr)
        return 2
    lo, hi = hottest_region(samples)
    start, size = lo - 256, hi - lo + 512
    code = ctypes.string_at(start, size)  # our own, still mapped, JIT code
    args.out.parent.mkdir(parents=True, exist_ok=True)
    with tempfile.NamedTemporaryFile(suffix=".bin") as blob:
        blob.write(code)
        blob.flush()
        listing = subprocess.run(["objdump", "-D", "-b", "binary", "-mi386:x86-64", f"--adjust-vma={start:#x}",
                                  blob.name], capture_output=True, text=True).stdout
    buckets = collections.Counter()
    with open(args.out, "w") as out:
        for line in listing.splitlines():
            head = line.split(":", 1)[0].strip()
            try:
                address = int(head, 16)
            except ValueError:
                out.write(line + "\n")
                continue
            share = 100.0 * samples.get(address, 0) / total
            buckets[address >> 8] += share
            out.write(f"{share:6.2f} {line}\n")
    inside = sum(c for a, c in samples.items() if start <= a < start + size) / total
    print(f"{total} samples, {100 * inside:.1f}% in the kernel's code at {start:#x}..{start + size:#x}")
    for bucket in sorted(buckets):
        if buckets[bucket] > 0.8:
            print(f"  {bucket << 8:#x}  {buckets[bucket]:5.1f}%")
    print(f"annotated disassembly: {args.out}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
