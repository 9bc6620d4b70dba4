"""Merging the blocks of a run into exact integer totals, after verifying the run's integrity."""
from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import pyarrow as pa
import pyarrow.compute as pc

from .errors import RunIntegrityError
from .families import Family, parse_family
from .store import RunStore


@dataclass
class MergedRun:
    """Exact integer totals of a complete run.

    ``words``: columns word, k, sum_c, sum_c2, sum_cm (one row per word that occurs);
    ``positions``: k, sum_m, sum_m2; ``lengths``: length, rationals; ``denominators``: per-q rows
    (empty for sampled runs); ``block_ends``: per block (in plan order) q_hi and cumulative members.
    """

    path: Path
    params: dict
    family: Family
    method: str
    members: int
    partial_quotients: int
    words: pa.Table
    positions: pa.Table
    lengths: pa.Table
    denominators: pa.Table | None
    goodness: pa.Table | None = None


def _concat(store: RunStore, kind: str) -> pa.Table:
    return pa.concat_tables([store.read_block(b["id"], kind) for b in store.plan])


def merge_run(path_or_store) -> MergedRun:
    """Verify every block (refusing an incomplete or inconsistent run) and sum the block tables."""
    store = path_or_store if isinstance(path_or_store, RunStore) else RunStore.open(Path(path_or_store))
    store.require_complete()
    kinds = store.manifest.get("block_kinds", ["words", "positions", "lengths", "denominators"])
    words = _concat(store, "words").group_by(["word", "k"]).aggregate(
        [("sum_c", "sum"), ("sum_c2", "sum"), ("sum_cm", "sum")]
    ).rename_columns(["word", "k", "sum_c", "sum_c2", "sum_cm"])
    positions = _concat(store, "positions").group_by("k").aggregate(
        [("sum_m", "sum"), ("sum_m2", "sum")]).rename_columns(["k", "sum_m", "sum_m2"]).sort_by("k")
    lengths = _concat(store, "lengths").group_by("length").aggregate(
        [("rationals", "sum")]).rename_columns(["length", "rationals"]).sort_by("length")
    denominators = _concat(store, "denominators").sort_by("q") if "denominators" in kinds else None
    goodness = None
    if "goodness" in kinds:
        # sampled ranges span several blocks: sum their rows per (range, eps)
        goodness = _concat(store, "goodness").group_by(["q_lo", "q_hi", "eps"]).aggregate(
            [("members", "sum"), ("good", "sum")]).rename_columns(["q_lo", "q_hi", "eps", "members", "good"]) \
            .sort_by([("q_lo", "ascending"), ("eps", "ascending")])
    members = int(pc.sum(lengths["rationals"]).as_py() or 0)
    records = [store.read_record(b["id"]) for b in store.plan]
    recorded_members = sum(r["members"] for r in records)
    recorded_pq = sum(r["partial_quotients"] for r in records)
    pq_from_lengths = int(pc.sum(pc.multiply(lengths["length"].cast(pa.int64()), lengths["rationals"])).as_py() or 0)
    if members != recorded_members or pq_from_lengths != recorded_pq:
        raise RunIntegrityError(
            f"run {str(store.path)!r} is inconsistent: length histogram gives {members} rationals and "
            f"{pq_from_lengths} partial quotients, completion records {recorded_members} and {recorded_pq}"
        )
    return MergedRun(
        path=store.path,
        params=store.params,
        family=parse_family(store.params["family"]),
        method=store.manifest["kind"],
        members=members,
        partial_quotients=pq_from_lengths,
        words=words,
        positions=positions,
        lengths=lengths,
        denominators=denominators,
        goodness=goodness,
    )
