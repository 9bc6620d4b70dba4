"""Run directories: manifest, atomic block files, completion records, verification.

Layout of a run directory::

    manifest.json                 schema version, tool version, parameters, their hash, the block plan
    blocks/<id>.<kind>.parquet    one Parquet file per block and table kind (see BLOCK_KINDS)
    blocks/<id>.done.json         completion record, written last: sha256 and size of every block file,
                                  members and partial quotients of the block
    tables/                       merged tables written by ``cfsweep table`` (frequency.parquet, ...)

A block is complete exactly when its completion record exists, names the run's parameter hash, and every
file it lists exists with the recorded size and sha256. Files are written to a temporary name in the same
directory, flushed to disk and renamed, so a killed process leaves either the old state or the new one,
never a half-written file under a final name.
"""
from __future__ import annotations

import hashlib
import json
import os
import tempfile
from dataclasses import dataclass
from pathlib import Path

import pyarrow as pa
import pyarrow.parquet as pq

from . import __version__
from .errors import RunIntegrityError, UsageError
from .schema import SCHEMA_VERSION

MANIFEST = "manifest.json"
BLOCK_DIR = "blocks"
TABLE_DIR = "tables"
BLOCK_KINDS = ("words", "positions", "lengths", "denominators")
#: Every kind a block may have; a run's manifest lists the ones it writes ("block_kinds").
ALL_BLOCK_KINDS = BLOCK_KINDS + ("goodness",)


def params_hash(params: dict) -> str:
    """sha256 of the canonical JSON of the parameters (sorted keys, no whitespace)."""
    text = json.dumps(params, sort_keys=True, separators=(",", ":"))
    return hashlib.sha256(text.encode()).hexdigest()


def atomic_write_bytes(path: Path, data: bytes) -> None:
    """Write ``data`` to ``path`` via a temporary file in the same directory, fsync and rename."""
    path.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=path.parent)
    try:
        with os.fdopen(fd, "wb") as fh:
            fh.write(data)
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(tmp, path)
    except BaseException:
        try:
            os.unlink(tmp)
        except FileNotFoundError:
            pass
        raise


def atomic_write_json(path: Path, obj) -> None:
    atomic_write_bytes(path, (json.dumps(obj, indent=2, sort_keys=True) + "\n").encode())


def parquet_bytes(table: pa.Table, metadata: dict[str, str]) -> bytes:
    """Serialise a table to Parquet bytes with cfsweep key-value metadata merged into the schema."""
    meta = dict(table.schema.metadata or {})
    meta.update({k.encode(): str(v).encode() for k, v in metadata.items()})
    sink = pa.BufferOutputStream()
    pq.write_table(table.replace_schema_metadata(meta), sink, compression="zstd")
    return sink.getvalue().to_pybytes()


def atomic_write_parquet(path: Path, table: pa.Table, metadata: dict[str, str]) -> tuple[str, int]:
    """Write a Parquet file atomically; return (sha256, size in bytes)."""
    data = parquet_bytes(table, metadata)
    atomic_write_bytes(path, data)
    return hashlib.sha256(data).hexdigest(), len(data)


def _sha256_file(path: Path) -> str:
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        for chunk in iter(lambda: fh.read(1 << 20), b""):
            h.update(chunk)
    return h.hexdigest()


@dataclass
class BlockStatus:
    block_id: str
    state: str  # "complete", "missing" or "bad"
    reason: str = ""


class RunStore:
    """A run directory on disk (see module docstring)."""

    def __init__(self, path: Path, manifest: dict):
        self.path = Path(path)
        self.manifest = manifest

    # -- creation and opening -------------------------------------------------------------------
    @staticmethod
    def check_output_path(path: Path) -> None:
        path = Path(path)
        if path.exists() and not path.is_dir():
            raise UsageError(f"output path {str(path)!r} is a file; allowed: a new or existing run directory")
        if path.is_dir() and any(path.iterdir()) and not (path / MANIFEST).exists():
            raise UsageError(
                f"output path {str(path)!r} is a non-empty directory without a cfsweep manifest; "
                "allowed: a new directory, an empty one, or a run directory of the same parameters"
            )

    @classmethod
    def create_or_resume(cls, path: Path, kind: str, params: dict, plan: list[dict],
                         block_kinds: list[str] | None = None) -> "RunStore":
        """Create the run directory, or reopen it if it holds a run with identical parameters.

        A directory holding a run with different parameters is refused, naming the parameters that differ.
        """
        path = Path(path)
        cls.check_output_path(path)
        h = params_hash(params)
        manifest_path = path / MANIFEST
        if manifest_path.exists():
            old = cls.open(path).manifest
            if old.get("params_hash") != h:
                old_params = old.get("params", {})
                diff = sorted(k for k in set(old_params) | set(params) if old_params.get(k) != params.get(k))
                details = ", ".join(f"{k}: {old_params.get(k)!r} -> {params.get(k)!r}" for k in diff)
                raise UsageError(
                    f"run directory {str(path)!r} holds a run with other parameters ({details}); "
                    "allowed: the same parameters (to resume) or a new --out directory"
                )
            return cls(path, old)
        manifest = {
            "schema_version": SCHEMA_VERSION,
            "tool": "cfsweep",
            "tool_version": __version__,
            "kind": kind,
            "params": params,
            "params_hash": h,
            "plan": plan,
            "block_kinds": list(block_kinds or BLOCK_KINDS),
        }
        (path / BLOCK_DIR).mkdir(parents=True, exist_ok=True)
        atomic_write_json(manifest_path, manifest)
        return cls(path, manifest)

    @classmethod
    def open(cls, path: Path) -> "RunStore":
        path = Path(path)
        manifest_path = path / MANIFEST
        if not manifest_path.is_file():
            raise UsageError(f"{str(path)!r} is not a cfsweep run directory (no {MANIFEST})")
        try:
            manifest = json.loads(manifest_path.read_text())
        except json.JSONDecodeError as exc:
            raise RunIntegrityError(f"manifest of {str(path)!r} is not valid JSON: {exc}") from None
        if manifest.get("schema_version") != SCHEMA_VERSION:
            raise RunIntegrityError(
                f"run {str(path)!r} has schema version {manifest.get('schema_version')!r}; "
                f"this cfsweep reads version {SCHEMA_VERSION}"
            )
        return cls(path, manifest)

    # -- blocks ---------------------------------------------------------------------------------
    @property
    def params(self) -> dict:
        return self.manifest["params"]

    @property
    def plan(self) -> list[dict]:
        return self.manifest["plan"]

    def block_file(self, block_id: str, kind: str) -> Path:
        return self.path / BLOCK_DIR / f"{block_id}.{kind}.parquet"

    def done_file(self, block_id: str) -> Path:
        return self.path / BLOCK_DIR / f"{block_id}.done.json"

    def block_metadata(self, block_id: str) -> dict[str, str]:
        return {
            "cfsweep.schema_version": str(SCHEMA_VERSION),
            "cfsweep.params_hash": self.manifest["params_hash"],
            "cfsweep.block_id": block_id,
            "cfsweep.family": str(self.params.get("family", "")),
        }

    def write_block(self, block_id: str, tables: dict[str, pa.Table], record: dict) -> None:
        """Write all files of a block atomically, then its completion record."""
        files = {}
        meta = self.block_metadata(block_id)
        for kind, table in tables.items():
            sha, size = atomic_write_parquet(self.block_file(block_id, kind), table, meta)
            files[kind] = {"sha256": sha, "bytes": size}
        record = dict(record, block_id=block_id, params_hash=self.manifest["params_hash"], files=files)
        atomic_write_json(self.done_file(block_id), record)

    def read_record(self, block_id: str) -> dict | None:
        try:
            return json.loads(self.done_file(block_id).read_text())
        except (FileNotFoundError, json.JSONDecodeError):
            return None

    def check_block(self, block: dict, deep: bool = True) -> BlockStatus:
        """Verify one block of the plan against its completion record and the plan's member count."""
        bid = block["id"]
        done = self.done_file(bid)
        if not done.exists():
            present = [k for k in ALL_BLOCK_KINDS if self.block_file(bid, k).exists()]
            if present:
                return BlockStatus(bid, "bad", "block files without a completion record")
            return BlockStatus(bid, "missing")
        record = self.read_record(bid)
        if record is None:
            return BlockStatus(bid, "bad", "completion record is not valid JSON")
        if record.get("params_hash") != self.manifest["params_hash"]:
            return BlockStatus(bid, "bad", "completion record belongs to another parameter set")
        if record.get("members") != block.get("expected_members"):
            return BlockStatus(
                bid, "bad",
                f"members {record.get('members')} differ from the {block.get('expected_members')} the plan implies",
            )
        for kind in self.manifest.get("block_kinds", BLOCK_KINDS):
            info = record.get("files", {}).get(kind)
            path = self.block_file(bid, kind)
            if info is None:
                return BlockStatus(bid, "bad", f"completion record lists no {kind} file")
            if not path.exists():
                return BlockStatus(bid, "bad", f"{path.name} is missing")
            if path.stat().st_size != info["bytes"]:
                return BlockStatus(bid, "bad", f"{path.name} has {path.stat().st_size} bytes, expected {info['bytes']}")
            if deep and _sha256_file(path) != info["sha256"]:
                return BlockStatus(bid, "bad", f"{path.name} does not match its recorded sha256")
        return BlockStatus(bid, "complete")

    def statuses(self, deep: bool = True) -> list[BlockStatus]:
        return [self.check_block(b, deep=deep) for b in self.plan]

    def discard_block(self, block_id: str) -> None:
        """Remove the completion record first (so the block reads as missing), then its files."""
        for path in [self.done_file(block_id)] + [self.block_file(block_id, k) for k in ALL_BLOCK_KINDS]:
            try:
                path.unlink()
            except FileNotFoundError:
                pass

    def read_block(self, block_id: str, kind: str) -> pa.Table:
        return pq.read_table(self.block_file(block_id, kind))

    def require_complete(self) -> None:
        """Raise RunIntegrityError naming every missing or bad block."""
        bad = [s for s in self.statuses() if s.state != "complete"]
        if bad:
            missing = [s.block_id for s in bad if s.state == "missing"]
            broken = [f"{s.block_id} ({s.reason})" for s in bad if s.state == "bad"]
            parts = []
            if missing:
                parts.append(f"{len(missing)} missing: {_shorten(missing)}")
            if broken:
                parts.append(f"{len(broken)} bad: {_shorten(broken)}")
            raise RunIntegrityError(
                f"run {str(self.path)!r} is incomplete ({'; '.join(parts)} of {len(self.plan)} blocks); "
                "rerun the same sweep command to compute them"
            )


def _shorten(items: list[str], n: int = 8) -> str:
    return ", ".join(items[:n]) + (f", ... (+{len(items) - n})" if len(items) > n else "")
