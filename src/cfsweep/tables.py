"""Frequency tables of runs: merge, compute statistics, and write the run's ``tables/`` folder."""
from __future__ import annotations

import json
from pathlib import Path

import pyarrow as pa
import pyarrow.parquet as pq

from .reduce import MergedRun, merge_run
from .stats import convergence, frequency_rows, summary
from .store import TABLE_DIR, atomic_write_bytes, atomic_write_json, parquet_bytes


def _merged(run) -> MergedRun:
    if isinstance(run, MergedRun):
        return run
    store = getattr(run, "store", None)
    return merge_run(store if store is not None else run)


def frequency_table(run) -> pa.Table:
    """The frequency table of a complete run (a Run, a run path, or a MergedRun) as a pyarrow Table.

    One row per word that occurs; columns as documented in :mod:`cfsweep.schema` (counts exact, standard
    errors with the rational as sampling unit). Raises RunIntegrityError if blocks are missing or bad.
    """
    return frequency_rows(_merged(run))


def analyse(run) -> tuple[pa.Table, dict, pa.Table]:
    """(frequency table, summary dict, convergence table) of a complete run.

    The convergence table follows the sweep along q (sweeps) or lists the sampled ranges (sampled runs).
    """
    merged = _merged(run)
    table = frequency_rows(merged)
    if merged.method == "sample":
        from .sampled import range_convergence
        from .store import RunStore

        conv = range_convergence(RunStore.open(merged.path))
    else:
        conv = convergence(merged)
    return table, summary(merged, table), conv


def write_run_tables(run_path: Path, table: pa.Table, info: dict, conv: pa.Table) -> dict[str, Path]:
    """Write tables/frequency.parquet, tables/convergence.parquet and tables/summary.json atomically."""
    out = Path(run_path) / TABLE_DIR
    paths = {"frequency": out / "frequency.parquet", "convergence": out / "convergence.parquet",
             "summary": out / "summary.json"}
    meta = {"cfsweep.family": info["family"], "cfsweep.method": info["method"]}
    atomic_write_bytes(paths["frequency"], parquet_bytes(table, meta))
    atomic_write_bytes(paths["convergence"], parquet_bytes(conv, meta))
    atomic_write_json(paths["summary"], info)
    return paths


def read_frequency_table(run_path: Path) -> pa.Table:
    """Read a previously written tables/frequency.parquet (plain Parquet, no cfsweep needed)."""
    return pq.read_table(Path(run_path) / TABLE_DIR / "frequency.parquet")


def summary_json(info: dict) -> str:
    return json.dumps(info, indent=2, sort_keys=True)
