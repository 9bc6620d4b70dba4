"""Executors: run the pending blocks of a plan and store them. One interface, one merge path.

``run_local`` computes blocks one after another in this process, each with all Numba threads.
"""
from __future__ import annotations

import sys
import time
from contextlib import contextmanager

import numba
from tqdm import tqdm

from .blocks import compute_block
from .families import Family
from .store import RunStore


@contextmanager
def numba_threads(threads: int | None):
    """Set the Numba thread count for the duration of the block, restoring it afterwards."""
    old = numba.get_num_threads()
    try:
        if threads is not None:
            numba.set_num_threads(threads)
        yield numba.get_num_threads()
    finally:
        numba.set_num_threads(old)


def progress_bar(total: int, quiet: bool, desc: str):
    """tqdm over blocks; silent when ``quiet`` or when stderr is not a terminal."""
    disable = quiet or not sys.stderr.isatty()
    return tqdm(total=total, desc=desc, unit="block", disable=disable, dynamic_ncols=True, leave=True)


def store_block(store: RunStore, block: dict, family: Family, threads: int) -> dict:
    """Compute one block and write it (files first, completion record last). Returns the record."""
    p = store.params
    if p["kind"] == "sample":
        from .sampled import compute_sample_block

        tables, record = compute_sample_block(p, block, threads)
        record.update(q_lo=block["q_lo"], q_hi=block["q_hi"], finished_unix=time.time())
        store.write_block(block["id"], tables, record)
        return record
    result = compute_block(family, block["q_lo"], block["q_hi"], p["cap"], p["words"], threads, goodness=p)
    record = {
        "members": result.members,
        "partial_quotients": result.partial_quotients,
        "q_lo": block["q_lo"],
        "q_hi": block["q_hi"],
        "kernel_seconds": round(result.seconds, 6),
        "finished_unix": time.time(),
    }
    store.write_block(block["id"], result.tables, record)
    return record


def run_local(store: RunStore, pending: list[dict], family: Family, threads: int | None,
              quiet: bool = False) -> None:
    """Compute the pending blocks in order of the plan on this machine."""
    with numba_threads(threads) as n_threads, progress_bar(len(pending), quiet, "sweep") as bar:
        t0 = time.perf_counter()
        pqs = 0
        for block in pending:
            record = store_block(store, block, family, n_threads)
            pqs += record["partial_quotients"]
            elapsed = time.perf_counter() - t0
            bar.set_postfix_str(f"{pqs / max(elapsed, 1e-9):.3g} pq/s", refresh=False)
            bar.update(1)
