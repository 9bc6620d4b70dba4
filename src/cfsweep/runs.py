"""The sweep entry point and the Run object that every later step reads."""
from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numba

from .errors import UsageError
from .executors import interrupt_on_sigterm, parse_cluster, parse_shard, run_dask, run_local, shard_blocks
from .families import Family, expected_members, parse_family
from .plan import MAX_BLOCKS, make_plan
from .store import RunStore, full_disk_as_error, sweep_lock
from .validate import (MAX_CAP, MAX_SWEEP_DEN, MAX_WORD_LENGTH, check_range, check_word_table,
                       parse_int)

DEFAULT_CAP = 32
DEFAULT_WORDS = 3


@dataclass
class Run:
    """A run directory opened for reading: manifest, parameters and block states."""

    store: RunStore

    @property
    def path(self) -> Path:
        return self.store.path

    @property
    def params(self) -> dict:
        return self.store.params

    @property
    def family(self) -> Family:
        return parse_family(self.params["family"])

    def statuses(self):
        return self.store.statuses()

    def __repr__(self) -> str:
        return f"Run({str(self.path)!r}, {self.store.manifest['kind']}, family={self.params['family']})"


def open_run(path) -> Run:
    """Open an existing run directory (raises UsageError if it is not one)."""
    return Run(RunStore.open(Path(path)))


def sweep_params(max_den, min_den=2, family="all", cap=DEFAULT_CAP, words=DEFAULT_WORDS, blocks=None) -> dict:
    """Validate sweep parameters; return the canonical parameter dict stored in the manifest."""
    max_den = check_range(parse_int(max_den, "--max-den"), "--max-den", 2, MAX_SWEEP_DEN)
    min_den = check_range(parse_int(min_den, "--min-den"), "--min-den", 2, max_den)
    fam = parse_family(family)
    cap = check_range(parse_int(cap, "--cap"), "--cap", 2, MAX_CAP)
    words = check_range(parse_int(words, "--words"), "--words", 1, MAX_WORD_LENGTH)
    check_word_table(cap, words)
    if blocks is not None:
        blocks = check_range(parse_int(blocks, "--blocks"), "--blocks", 1, MAX_BLOCKS)
    return {
        "kind": "sweep",
        "min_den": min_den,
        "max_den": max_den,
        "family": fam.canonical,
        "cap": cap,
        "words": words,
        "blocks": blocks,
    }


def plan_blocks(params: dict) -> list[dict]:
    """The block plan with the member count each block must hold (counted, not expanded)."""
    fam = parse_family(params["family"])
    plan = []
    for block in make_plan(params["min_den"], params["max_den"], params["blocks"]):
        entry = block.to_json()
        entry["expected_members"] = int(sum(expected_members(fam, block.q_lo, block.q_hi)))
        plan.append(entry)
    return plan


def check_threads(threads) -> int | None:
    if threads is None:
        return None
    return check_range(parse_int(threads, "--threads"), "--threads", 1, numba.config.NUMBA_NUM_THREADS)


def sweep(max_den, out, *, min_den=2, family="all", cap=DEFAULT_CAP, words=DEFAULT_WORDS, blocks=None,
          threads=None, quiet=True, cluster=None, shard=None) -> Run:
    """Sweep every member p/q of ``family`` with min_den <= q <= max_den into the run directory ``out``.

    Parameters: ``max_den`` (2 .. 2^31-1), ``min_den`` (2 .. max_den), ``family`` (see
    :mod:`cfsweep.families`), ``cap`` D (digits >= D pooled as "D+", 2 .. 65536), ``words`` K (word lengths
    1..K; the word table sum_k D^k must stay <= 2^24 rows), ``blocks`` (default: by estimated work),
    ``threads`` (Numba threads; default all; with a cluster: per task, default by the rule in
    :mod:`cfsweep.executors`). ``cluster``: None (this process), ``"local:N"``, ``"tcp://HOST:PORT"`` or a
    ``distributed.Client``. ``shard``: ``"I/N"`` or (I, N) to compute only the blocks with index = I
    (mod N), for batch job arrays; the run is then complete once every shard has run.
    Completed blocks of an earlier identical call are kept; bad or missing ones are (re)computed. A
    directory holding a run of other parameters is refused, as is a second sweep of a directory that a
    sweep is writing (see :func:`cfsweep.store.sweep_lock`). Returns the :class:`Run`.
    """
    params = sweep_params(max_den, min_den, family, cap, words, blocks)
    threads = check_threads(threads)
    shard = parse_shard(shard)
    cluster_spec = parse_cluster(cluster)
    if shard is not None and cluster_spec is not None:
        raise UsageError("--shard and --cluster exclude each other; allowed: one of them (a shard job runs "
                         "its blocks locally; a Dask cluster runs all blocks)")
    out = Path(out)
    RunStore.check_output_path(out)
    plan = plan_blocks(params)
    with interrupt_on_sigterm(), full_disk_as_error(out), sweep_lock(out, shard):
        store = RunStore.create_or_resume(out, "sweep", params, plan, remove_stale_temp=shard is None)
        selected = shard_blocks(store.plan, shard)
        # Under the lock nobody else writes these blocks: leftovers of killed writers can go.
        store.remove_temp_files(None if shard is None else [b["id"] for b in selected])
        pending = []
        for block in selected:
            status = store.check_block(block)
            if status.state == "bad":
                store.discard_block(block["id"])
            if status.state != "complete":
                pending.append(block)
        if cluster_spec is None:
            run_local(store, pending, parse_family(params["family"]), threads, quiet=quiet)
        else:
            run_dask(store, pending, cluster_spec, threads, quiet=quiet)
            store.remove_temp_files()  # writers lost mid-block leave theirs; every task has finished
    return Run(store)
