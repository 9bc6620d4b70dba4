"""The sweep entry point and the Run object that every later step reads."""
from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numba

from .errors import UsageError
from .executors import interrupt_on_sigterm, parse_cluster, parse_shard, run_dask, run_local, shard_blocks
from .families import Family, expected_members, parse_family
from .plan import MAX_BLOCKS, make_plan
from .goodness import check_goodness_params
from .store import BLOCK_KINDS, RunStore, full_disk_as_error, sweep_lock
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


def sweep_params(max_den, min_den=2, family="all", cap=DEFAULT_CAP, words=DEFAULT_WORDS, blocks=None,
                 good_eps=None, good_k=1, good_min_len=None, predicate=None) -> dict:
    """Validate sweep parameters; return the canonical parameter dict stored in the manifest."""
    max_den = check_range(parse_int(max_den, "--max-den"), "--max-den", 2, MAX_SWEEP_DEN)
    min_den = check_range(parse_int(min_den, "--min-den"), "--min-den", 2, max_den)
    fam = parse_family(family)
    if predicate is not None:
        from .predicates import family_with_predicate

        fam = family_with_predicate(fam, predicate)
    cap = check_range(parse_int(cap, "--cap"), "--cap", 2, MAX_CAP)
    words = check_range(parse_int(words, "--words"), "--words", 1, MAX_WORD_LENGTH)
    check_word_table(cap, words)
    if blocks is not None:
        blocks = check_range(parse_int(blocks, "--blocks"), "--blocks", 1, MAX_BLOCKS)
    params = {
        "kind": "sweep",
        "min_den": min_den,
        "max_den": max_den,
        "family": fam.canonical,
        "cap": cap,
        "words": words,
        "blocks": blocks,
    }
    if fam.predicate is not None:
        from .predicates import identity

        params["predicate"] = identity(fam.predicate)
    params.update(goodness_params(good_eps, good_k, good_min_len))
    return params


def goodness_params(good_eps, good_k=1, good_min_len=None) -> dict:
    """Manifest entries of the goodness options (all None when goodness is off)."""
    if good_eps is None:
        return {"good_eps": None, "good_k": None, "good_min_len": None}
    if isinstance(good_eps, str):
        good_eps = [x for x in good_eps.split(",")]
    elif isinstance(good_eps, (int, float)):
        good_eps = [good_eps]
    k = parse_int(good_k, "--good-k")
    min_len = None if good_min_len is None else parse_int(good_min_len, "--good-min-len")
    eps, k, min_len = check_goodness_params(list(good_eps), k, min_len)
    return {"good_eps": list(eps), "good_k": k, "good_min_len": min_len}


def block_kinds(params: dict) -> list[str]:
    kinds = list(BLOCK_KINDS)
    if params.get("good_eps"):
        kinds.append("goodness")
    return kinds


def run_family(params: dict) -> Family:
    """The family of a run, with its predicate resolved and checked against the manifest's source hash."""
    fam = parse_family(params["family"])
    recorded = params.get("predicate")
    if recorded is not None:
        from .predicates import identity

        now = identity(fam.predicate)["source_sha256"]
        if recorded.get("source_sha256") and now and now != recorded["source_sha256"]:
            raise UsageError(f"predicate {recorded['name']} changed since the run was planned (source sha256 "
                             f"{now[:12]} vs {recorded['source_sha256'][:12]}); allowed: the same predicate")
    return fam


def plan_blocks(params: dict) -> list[dict]:
    """The block plan with the member count each block must hold (counted, not expanded)."""
    fam = run_family(params)
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
          threads=None, quiet=True, good_eps=None, good_k=1, good_min_len=None, predicate=None,
          cluster=None, shard=None) -> Run:
    """Sweep every member p/q of ``family`` with min_den <= q <= max_den into the run directory ``out``.

    Parameters: ``max_den`` (2 .. 2^31-1), ``min_den`` (2 .. max_den), ``family`` (see
    :mod:`cfsweep.families`), ``cap`` D (digits >= D pooled as "D+", 2 .. 65536), ``words`` K (word lengths
    1..K; the word table sum_k D^k must stay <= 2^24 rows), ``blocks`` (default: by estimated work),
    ``threads`` (Numba threads; default all; with a cluster: per task, default by the rule in
    :mod:`cfsweep.executors`). ``good_eps`` (tolerances 0 < eps < 1, a list or a comma-separated
    string), ``good_k`` (word lengths 1..6, default 1) and ``good_min_len`` (default good_k) switch on
    per-denominator counts of (eps, k)-good members (see :mod:`cfsweep.goodness`). ``predicate``: a
    Numba-jitted ``(p, q) -> bool`` (or "module:function") narrowing the family; checked before any
    block runs. ``cluster``: None (this process), ``"local:N"``, ``"tcp://HOST:PORT"`` or a
    ``distributed.Client``. ``shard``: ``"I/N"`` or (I, N) to compute only the blocks with index = I
    (mod N), for batch job arrays; the run is then complete once every shard has run.
    Completed blocks of an earlier identical call are kept; bad or missing ones are (re)computed. A
    directory holding a run of other parameters is refused, as is a second sweep of a directory that a
    sweep is writing (see :func:`cfsweep.store.sweep_lock`). Returns the :class:`Run`.
    """
    params = sweep_params(max_den, min_den, family, cap, words, blocks, good_eps, good_k, good_min_len, predicate)
    return _execute(Path(out), "sweep", params, plan_blocks(params), block_kinds(params), threads, quiet,
                    cluster, shard)


def _execute(out: Path, kind: str, params: dict, plan: list[dict], kinds: list[str], threads, quiet, cluster,
             shard) -> Run:
    """Create or resume the run directory and compute its pending blocks (local, Dask or one shard)."""
    threads = check_threads(threads)
    shard = parse_shard(shard)
    cluster_spec = parse_cluster(cluster)
    if shard is not None and cluster_spec is not None:
        raise UsageError("--shard and --cluster exclude each other; allowed: one of them (a shard job runs "
                         "its blocks locally; a Dask cluster runs all blocks)")
    RunStore.check_output_path(out)
    with interrupt_on_sigterm(), full_disk_as_error(out), sweep_lock(out, shard):
        store = RunStore.create_or_resume(out, kind, params, plan, kinds, remove_stale_temp=shard is None)
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
            run_local(store, pending, run_family(params), threads, quiet=quiet)
        else:
            run_dask(store, pending, cluster_spec, threads, quiet=quiet)
            store.remove_temp_files()  # writers lost mid-block leave theirs; every task has finished
    return Run(store)


def sample(out, *, den_range=None, scan=None, samples, seed, family="all", cap=DEFAULT_CAP, words=DEFAULT_WORDS,
           block_samples=None, threads=None, quiet=True, good_eps=None, good_k=1, good_min_len=None,
           cluster=None, shard=None) -> Run:
    """Sample ``samples`` members of ``family`` uniformly per denominator range into the run ``out``.

    Give exactly one of ``den_range`` ("LO:HI" or (LO, HI), 2 <= LO < HI <= 2^63; denominators
    LO <= q < HI) and ``scan`` ("J0:J1": the ladder [10^j, 2*10^j), j = J0..J1, 1 <= J0 <= J1 <= 18,
    ``samples`` in each). ``seed`` (0 .. 2^64-1) fixes every draw, whatever the split into blocks,
    threads, workers or shards. Other options as for :func:`sweep`. Returns the :class:`Run`.
    """
    from .sampled import parse_range, plan_sample_blocks, sample_params, scan_ranges

    if (den_range is None) == (scan is None):
        raise UsageError("give exactly one of --den-range LO:HI and --scan J0:J1")
    ranges = [parse_range(den_range)] if den_range is not None else scan_ranges(scan)
    params = sample_params(ranges, samples, seed, family, cap, words, block_samples, good_eps, good_k,
                           good_min_len, scan=None if scan is None else str(scan))
    kinds = [k for k in block_kinds(params) if k != "denominators"]
    return _execute(Path(out), "sample", params, plan_sample_blocks(params), kinds, threads, quiet, cluster, shard)
