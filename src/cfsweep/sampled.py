"""Sampled runs: members drawn uniformly from a family with LO <= q < HI, up to q < 2**63.

Randomness is counter-based (Philox-4x64-10, ``cfsweep.kernels.sampling``): sample i of range r uses
its own counters (., i, r, tag) under the key (seed, KEY_TAG), so a run is the same whatever the number
of blocks, threads, workers or shards. Blocks are slices [first_sample, first_sample + n) of a range.

Every sample is one family member (a rational), the sampling unit of the error bars: the frequency
table's standard errors and 95% intervals are genuine confidence statements about the frequency over the
family's members in the range (sampling with replacement).
"""
from __future__ import annotations

import math
import time

import numpy as np
import pyarrow as pa

from .blocks import goodness_table, tables_from_arrays
from .errors import UsageError
from .families import Family, parse_family
from .goodness import required_counts
from .kernels.goodness import goodness_pairs
from .kernels.sampling import (CLASS_ANY, CLASS_PRIME, CLASS_SQUAREFREE, divisor_table, icbrt_u64, in_class_u64,
                               sample_pairs)
from .kernels.sweep import tally_pairs
from .validate import check_range, parse_int

GENERATOR = "philox4x64-10"
#: Second key word of the Philox key, so that cfsweep streams differ from other uses of the same seed.
KEY_TAG = 0x6366737765657021
#: Samples per block (memory per block: 16 bytes per sample for the pairs).
DEFAULT_BLOCK_SAMPLES = 1 << 20
MAX_DEN_EXCLUSIVE = 2**63
CLASS_CODES = {"any": CLASS_ANY, "squarefree": CLASS_SQUAREFREE, "prime": CLASS_PRIME}


def parse_range(text) -> tuple[int, int]:
    """'LO:HI' (numbers like 1e12 allowed) -> (LO, HI) with 2 <= LO < HI <= 2**63."""
    if isinstance(text, (tuple, list)):
        lo, hi = text
    else:
        parts = str(text).split(":")
        if len(parts) != 2:
            raise UsageError(f"--den-range {text!r} is not LO:HI; allowed: 2 <= LO < HI <= 2^63, e.g. 1e12:2e12")
        lo, hi = parts
    lo = parse_int(lo, "--den-range LO")
    hi = parse_int(hi, "--den-range HI")
    if not (2 <= lo < hi <= MAX_DEN_EXCLUSIVE):
        raise UsageError(f"--den-range {lo}:{hi} is out of range; allowed: 2 <= LO < HI <= 2^63 = {MAX_DEN_EXCLUSIVE}")
    return lo, hi


def scan_ranges(text) -> list[tuple[int, int]]:
    """'J0:J1' -> the ladder [10^j, 2*10^j) for j = J0..J1 (1 <= J0 <= J1 <= 18)."""
    parts = str(text).split(":")
    if len(parts) != 2:
        raise UsageError(f"--scan {text!r} is not J0:J1; allowed: 1 <= J0 <= J1 <= 18")
    j0, j1 = (parse_int(p, "--scan") for p in parts)
    if not (1 <= j0 <= j1 <= 18):
        raise UsageError(f"--scan {j0}:{j1} is out of range; allowed: 1 <= J0 <= J1 <= 18")
    return [(10**j, 2 * 10**j) for j in range(j0, j1 + 1)]


def _family_codes(fam: Family) -> tuple[bool, int, int]:
    return fam.coprime_only, CLASS_CODES[fam.num], CLASS_CODES[fam.den]


def check_nonempty(fam: Family, lo: int, hi: int) -> None:
    """Refuse a range with no member (the rejection sampler would never end). Exact search near LO."""
    q_stop = min(hi, lo + 200_000)
    for q in range(lo, q_stop):
        if fam.den != "any" and not _in_class_exact(fam.den, q):
            continue
        for p in range(1, min(q, 5_000)):
            if fam.contains(p, q) if q < 10**6 else (_in_class_exact(fam.num, p) and
                                                     (not fam.coprime_only or math.gcd(p, q) == 1)):
                return
    raise UsageError(f"family {fam.canonical!r} has no member with {lo} <= q < {min(hi, q_stop)} "
                     "(searched exactly); allowed: a range that contains members")


def _in_class_exact(cls: str, m: int) -> bool:
    """Class membership for any m < 2**64 by the sampler's own exact tests (tested against sympy)."""
    if cls == "any":
        return True
    return bool(in_class_u64(np.uint64(m), CLASS_CODES[cls], _small_divisors()))


_DIVISORS = None


def _small_divisors():
    global _DIVISORS
    if _DIVISORS is None:
        _DIVISORS = divisor_table(1 << 16)
    return _DIVISORS


def sample_params(den_ranges, samples, seed, family="all", cap=32, words=3, block_samples=None,
                  good_eps=None, good_k=1, good_min_len=None, scan=None) -> dict:
    """Validate sampling parameters; return the manifest's parameter dict."""
    from .runs import goodness_params
    from .validate import MAX_CAP, MAX_WORD_LENGTH, check_word_table

    fam = parse_family(family)
    samples = check_range(parse_int(samples, "--samples"), "--samples", 1, 10**12)
    seed = check_range(parse_int(seed, "--seed"), "--seed", 0, 2**64 - 1)
    cap = check_range(parse_int(cap, "--cap"), "--cap", 2, MAX_CAP)
    words = check_range(parse_int(words, "--words"), "--words", 1, MAX_WORD_LENGTH)
    check_word_table(cap, words)
    block_samples = check_range(parse_int(block_samples or DEFAULT_BLOCK_SAMPLES, "--block-samples"),
                                "--block-samples", 1, 1 << 26)
    ranges = [list(r) for r in den_ranges]
    for lo, hi in ranges:
        check_nonempty(fam, lo, hi)
    params = {"kind": "sample", "den_ranges": ranges, "scan": scan, "samples_per_range": samples, "seed": seed,
              "generator": GENERATOR, "key_tag": KEY_TAG, "family": fam.canonical, "cap": cap, "words": words,
              "block_samples": block_samples}
    params.update(goodness_params(good_eps, good_k, good_min_len))
    return params


def plan_sample_blocks(params: dict) -> list[dict]:
    plan = []
    n, per = params["samples_per_range"], params["block_samples"]
    for r, (lo, hi) in enumerate(params["den_ranges"]):
        for first in range(0, n, per):
            index = len(plan)
            count = min(per, n - first)
            plan.append({"id": f"{index:06d}", "index": index, "range": r, "q_lo": lo, "q_hi": hi - 1,
                         "first_sample": first, "n_samples": count, "expected_members": count})
    return plan


def draw_block(params: dict, block: dict) -> tuple[np.ndarray, np.ndarray, int]:
    """The (p, q) pairs of one block and the number of attempts they took (deterministic)."""
    fam = parse_family(params["family"])
    coprime, num_class, den_class = _family_codes(fam)
    lo, hi = block["q_lo"], block["q_hi"] + 1
    divisors = divisor_table(int(icbrt_u64(np.uint64(hi - 1))) + 1) if CLASS_SQUAREFREE in (num_class, den_class) \
        else divisor_table(3)
    key = np.array([params["seed"], params["key_tag"]], np.uint64)
    n = block["n_samples"]
    ps = np.empty(n, np.uint64)
    qs = np.empty(n, np.uint64)
    attempts = sample_pairs(key, np.uint64(block["range"]), np.uint64(block["first_sample"]), n,
                            np.uint64(lo), np.uint64(hi), coprime, num_class, den_class, divisors, ps, qs)
    return ps, qs, int(attempts)


def compute_sample_block(params: dict, block: dict, threads: int):
    """Draw, expand and count one sampled block; returns (tables, record fields)."""
    t0 = time.perf_counter()
    ps, qs, attempts = draw_block(params, block)
    word_sums, position_sums, length_hist = tally_pairs(ps, qs, params["cap"], params["words"], threads)
    tables = tables_from_arrays(params["cap"], params["words"], word_sums, position_sums, length_hist)
    if params.get("good_eps"):
        eps = np.asarray(params["good_eps"], np.float64)
        edges = np.array([block["q_lo"], block["q_hi"] + 1], np.uint64)
        counts = goodness_pairs(ps, qs, edges, params["good_k"], params["good_min_len"], eps,
                                required_counts(params["good_eps"], params["good_k"]), threads)
        tables["goodness"] = goodness_table([block["q_lo"]], [block["q_hi"]], params["good_eps"],
                                            counts[:, 0], counts[:, 1:])
    record = {"members": int(ps.shape[0]), "partial_quotients": int((np.arange(length_hist.shape[0]) * length_hist).sum()),
              "attempts": attempts, "range": block["range"], "first_sample": block["first_sample"],
              "kernel_seconds": round(time.perf_counter() - t0, 6)}
    return tables, record


def range_frequencies(store, digits=(1, 2, 3, 4)) -> pa.Table:
    """Per sampled range: frequency of the digits 1..4 with standard errors and 95% intervals.

    Columns: range, q_lo, q_hi (inclusive), samples, word, frequency, std_error, ci_low, ci_high,
    gauss_measure, z. Built from the block sums of each range separately (the rational is the unit).
    """
    from .gauss import word_measure
    from .schema import Z95
    from .stats import ratio_standard_error

    cap = store.params["cap"]
    acc: dict[int, dict] = {}
    for block in store.plan:
        r = block["range"]
        a = acc.setdefault(r, {"q_lo": block["q_lo"], "q_hi": block["q_hi"], "n": 0, "m": 0, "m2": 0, "w": {}})
        a["n"] += store.read_record(block["id"])["members"]
        pos = store.read_block(block["id"], "positions").to_pydict()
        i = pos["k"].index(1)
        a["m"] += pos["sum_m"][i]
        a["m2"] += pos["sum_m2"][i]
        words = store.read_block(block["id"], "words").to_pydict()
        for w, k, c, c2, cm in zip(words["word"], words["k"], words["sum_c"], words["sum_c2"], words["sum_cm"]):
            if k == 1:
                s = a["w"].setdefault(w, [0, 0, 0])
                s[0] += c
                s[1] += c2
                s[2] += cm
    out = {name: [] for name in ("range", "q_lo", "q_hi", "samples", "word", "frequency", "std_error", "ci_low",
                                 "ci_high", "gauss_measure", "z")}
    for r in sorted(acc):
        a = acc[r]
        for d in digits:
            if d >= cap:
                continue
            c, c2, cm = a["w"].get(str(d), [0, 0, 0])
            f = c / a["m"] if a["m"] else float("nan")
            se = ratio_standard_error(a["n"], c, c2, cm, a["m"], a["m2"])
            mu = word_measure((d,), cap)
            for key, value in (("range", r), ("q_lo", a["q_lo"]), ("q_hi", a["q_hi"]), ("samples", a["n"]),
                               ("word", str(d)), ("frequency", f), ("std_error", se),
                               ("ci_low", None if se is None else f - Z95 * se),
                               ("ci_high", None if se is None else f + Z95 * se), ("gauss_measure", mu),
                               ("z", None if not se else (f - mu) / se)):
                out[key].append(value)
    return pa.table(out)


def range_convergence(store) -> pa.Table:
    """Digit frequencies per sampled range in the shape of a sweep's convergence table (q = range centre)."""
    t = range_frequencies(store).to_pydict()
    rows: dict[int, dict] = {}
    for r, lo, hi, n, w, f in zip(t["range"], t["q_lo"], t["q_hi"], t["samples"], t["word"], t["frequency"]):
        row = rows.setdefault(r, {"q": int(math.isqrt(lo * hi)), "members": n})
        row[f"freq_digit_{w}"] = f
    cols = {"q": [], "members": []} | {f"freq_digit_{d}": [] for d in range(1, 5)}
    for r in sorted(rows):
        for key in cols:
            cols[key].append(rows[r].get(key))
    return pa.table(cols)
