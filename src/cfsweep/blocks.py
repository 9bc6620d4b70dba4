"""From kernel arrays to block tables: the bridge between ``cfsweep.kernels`` and the store.

``compute_block`` runs the sweep kernel over one block of a plan and returns the four block tables
(see ``BLOCK_SCHEMAS``) plus its completion totals; nothing here touches the file system.
"""
from __future__ import annotations

import time
from dataclasses import dataclass

import numpy as np
import pyarrow as pa

from .families import Family
from .goodness import required_counts
from .kernels.goodness import goodness_block, goodness_pairs
from .kernels.sweep import ROW_DIGITS, sweep_block, word_offset
from .schema import word_label

BLOCK_SCHEMAS = {
    # per word that occurs: sums over the block's rationals r of c_r, c_r^2 and c_r * m_r
    "words": pa.schema([("word", pa.string()), ("k", pa.int32()), ("sum_c", pa.int64()),
                        ("sum_c2", pa.int64()), ("sum_cm", pa.int64())]),
    # per word length k: sums over rationals of m_r = max(0, n_r - k + 1) and m_r^2
    "positions": pa.schema([("k", pa.int32()), ("sum_m", pa.int64()), ("sum_m2", pa.int64())]),
    # number of rationals of each expansion length (lengths that occur)
    "lengths": pa.schema([("length", pa.int32()), ("rationals", pa.int64())]),
    # per denominator: members, partial quotients, occurrences of the digits 1..4 (null when pooled)
    "denominators": pa.schema([("q", pa.int64()), ("members", pa.int64()), ("partial_quotients", pa.int64())]
                              + [(f"digit_{d}", pa.int64()) for d in range(1, ROW_DIGITS + 1)]),
    # per denominator range [q_lo, q_hi] (one q for sweeps, a bin for sampled runs) and tolerance eps:
    # members and (eps, good_k)-good members
    "goodness": pa.schema([("q_lo", pa.int64()), ("q_hi", pa.int64()), ("eps", pa.float64()),
                           ("members", pa.int64()), ("good", pa.int64())]),
}


def goodness_table(q_lo, q_hi, eps_values, members, good) -> pa.Table:
    """Long-format goodness rows: one per (range, eps). ``members``: per range; ``good``: [range, eps]."""
    n_ranges, n_eps = good.shape
    rows_lo = np.repeat(np.asarray(q_lo, np.int64), n_eps)
    rows_hi = np.repeat(np.asarray(q_hi, np.int64), n_eps)
    return pa.table({
        "q_lo": pa.array(rows_lo), "q_hi": pa.array(rows_hi),
        "eps": pa.array(np.tile(np.asarray(eps_values, np.float64), n_ranges)),
        "members": pa.array(np.repeat(np.asarray(members, np.int64), n_eps)),
        "good": pa.array(good.reshape(-1).astype(np.int64)),
    }, schema=BLOCK_SCHEMAS["goodness"])


def decode_rows(rows: np.ndarray, cap: int, max_k: int) -> tuple[np.ndarray, list[tuple[int, ...]]]:
    """(k, symbols) of kernel word-table rows: row = word_offset(cap, k) + sum_i (s_i - 1) cap^(k-1-i)."""
    offsets = np.array([word_offset(cap, k) for k in range(1, max_k + 2)], dtype=np.int64)
    rows = np.asarray(rows, dtype=np.int64)
    ks = np.searchsorted(offsets, rows, side="right").astype(np.int32)
    codes = rows - offsets[ks - 1]
    symbols = []
    for k, code in zip(ks.tolist(), codes.tolist()):
        digits = []
        for _ in range(k):
            code, s = divmod(code, cap)
            digits.append(s + 1)
        symbols.append(tuple(reversed(digits)))
    return ks, symbols


@dataclass
class BlockResult:
    tables: dict[str, pa.Table]
    members: int
    partial_quotients: int
    seconds: float


def tables_from_arrays(cap, max_k, word_sums, position_sums, length_hist, per_den=None, q_lo=None):
    """Block tables from kernel outputs (shared by sweeps and sampled runs)."""
    occurring = np.nonzero(word_sums[:, 0])[0]
    ks, symbols = decode_rows(occurring, cap, max_k)
    tables = {
        "words": pa.table({
            "word": pa.array([word_label(w, cap) for w in symbols], pa.string()),
            "k": pa.array(ks, pa.int32()),
            "sum_c": pa.array(word_sums[occurring, 0]),
            "sum_c2": pa.array(word_sums[occurring, 1]),
            "sum_cm": pa.array(word_sums[occurring, 2]),
        }, schema=BLOCK_SCHEMAS["words"]),
        "positions": pa.table({
            "k": pa.array(np.arange(1, max_k + 1, dtype=np.int32)),
            "sum_m": pa.array(position_sums[1:, 0]),
            "sum_m2": pa.array(position_sums[1:, 1]),
        }, schema=BLOCK_SCHEMAS["positions"]),
    }
    lengths = np.nonzero(length_hist)[0]
    tables["lengths"] = pa.table({
        "length": pa.array(lengths.astype(np.int32)),
        "rationals": pa.array(length_hist[lengths]),
    }, schema=BLOCK_SCHEMAS["lengths"])
    if per_den is not None:
        cols = {
            "q": pa.array(np.arange(q_lo, q_lo + per_den.shape[0], dtype=np.int64)),
            "members": pa.array(per_den[:, 0]),
            "partial_quotients": pa.array(per_den[:, 1]),
        }
        for d in range(1, ROW_DIGITS + 1):
            col = per_den[:, 1 + d]
            cols[f"digit_{d}"] = pa.array(col, mask=col < 0)
        tables["denominators"] = pa.table(cols, schema=BLOCK_SCHEMAS["denominators"])
    return tables


# The sweep and goodness kernels deal denominators to chunks cyclically and each thread takes a run
# of consecutive chunks, so with several chunks per thread every thread gets denominators of every
# residue class mod 2, 3, ...: with one chunk per thread, 2 threads split even from odd q, and for
# reduced or square-free families even q have far fewer members (measured on 2 threads: sweep at
# Q = 20000, 1 chunk per thread 1.01 s for `reduced`, 4 per thread 0.81 s, square-free numerators
# and denominators 1.02 s and 0.78 s, `all` unchanged; goodness at Q = 6000, `reduced` 1.96 s and
# 1.58 s). The integers do not depend on the chunk count.
KERNEL_CHUNKS_PER_THREAD = 4


def compute_block(family: Family, q_lo: int, q_hi: int, cap: int, max_k: int, threads: int,
                  goodness: dict | None = None) -> BlockResult:
    """Sweep all members p/q of ``family`` with q_lo <= q <= q_hi on ``threads`` Numba threads.

    ``goodness``: None, or {"good_eps": [...], "good_k": K, "good_min_len": L} to add the per-denominator
    counts of good members (a second pass over the block by ``kernels.goodness``).
    """
    num_ok, den_ok, coprime_only = family.membership(q_hi)
    t0 = time.perf_counter()
    if family.predicate is not None:
        return _predicate_block(family, q_lo, q_hi, cap, max_k, goodness, t0)
    word_sums, position_sums, length_hist, per_den = sweep_block(
        q_lo, q_hi, num_ok, den_ok, coprime_only, cap, max_k, threads * KERNEL_CHUNKS_PER_THREAD)
    good = None
    if goodness and goodness.get("good_eps"):
        eps = np.asarray(goodness["good_eps"], np.float64)
        required = required_counts(goodness["good_eps"], goodness["good_k"])
        good = goodness_block(q_lo, q_hi, num_ok, den_ok, coprime_only, goodness["good_k"],
                              goodness["good_min_len"], eps, required, threads * KERNEL_CHUNKS_PER_THREAD)
    seconds = time.perf_counter() - t0
    tables = tables_from_arrays(cap, max_k, word_sums, position_sums, length_hist, per_den, q_lo)
    if good is not None:
        qs = np.arange(q_lo, q_hi + 1)
        tables["goodness"] = goodness_table(qs, qs, goodness["good_eps"], per_den[:, 0], good)
    return BlockResult(tables, int(per_den[:, 0].sum()), int(per_den[:, 1].sum()), seconds)


def _predicate_block(family: Family, q_lo: int, q_hi: int, cap: int, max_k: int, goodness, t0) -> BlockResult:
    """Slow path for user predicates: list the members of each q, then count them as explicit pairs."""
    from .kernels.predicate import member_numerators
    from .kernels.sweep import n_word_rows, tally_pairs_serial

    num_ok, den_ok, coprime_only = family.membership(q_hi)
    n_rows = n_word_rows(cap, max_k)
    word_sums = np.zeros((n_rows, 3), np.int64)
    position_sums = np.zeros((max_k + 1, 2), np.int64)
    length_hist = None
    per_den = np.zeros((q_hi - q_lo + 1, 2 + ROW_DIGITS), np.int64)
    good_eps = goodness.get("good_eps") if goodness else None
    good = np.zeros((q_hi - q_lo + 1, len(good_eps)), np.int64) if good_eps else None
    if good_eps:
        eps = np.asarray(good_eps, np.float64)
        required = required_counts(good_eps, goodness["good_k"])
    scratch = np.empty(q_hi + 1, np.int64)
    for q in range(q_lo, q_hi + 1):
        i = q - q_lo
        count = member_numerators(q, num_ok, den_ok, coprime_only, family.predicate, scratch)
        ps = scratch[:count].copy()
        qs = np.full(count, q, np.int64)
        ws, pos, lh = tally_pairs_serial(ps, qs, cap, max_k)
        word_sums += ws
        position_sums += pos
        length_hist = lh if length_hist is None else length_hist + lh
        per_den[i, 0] = count
        per_den[i, 1] = pos[1, 0]
        for d in range(1, ROW_DIGITS + 1):
            per_den[i, 1 + d] = ws[d - 1, 0] if d < cap else -1
        if good_eps and count:
            edges = np.array([q, q + 1], np.uint64)
            counts = goodness_pairs(ps.astype(np.uint64), qs.astype(np.uint64), edges, goodness["good_k"],
                                    goodness["good_min_len"], eps, required, 1)
            good[i] = counts[0, 1:]
    seconds = time.perf_counter() - t0
    tables = tables_from_arrays(cap, max_k, word_sums, position_sums, length_hist, per_den, q_lo)
    if good is not None:
        qs_all = np.arange(q_lo, q_hi + 1)
        tables["goodness"] = goodness_table(qs_all, qs_all, good_eps, per_den[:, 0], good)
    return BlockResult(tables, int(per_den[:, 0].sum()), int(per_den[:, 1].sum()), seconds)
