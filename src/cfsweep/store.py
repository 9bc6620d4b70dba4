"""Run directories: manifest, atomic block files, completion records, verification.

Layout of a run directory::

    manifest.json                 schema version, tool version, parameters, their hash, the block plan
    blocks/<id>.<kind>.parquet    one Parquet file per block and table kind (see BLOCK_KINDS)
    blocks/<id>.done.json         completion record, written last: sha256 and size of every block file,
                                  members and partial quotients of the block
    tables/                       merged tables written by ``cfsweep table`` (frequency.parquet, ...)
    sweep.lock                    lock of the sweep that is writing blocks (see :func:`sweep_lock`)
    locks/shard-I-of-N.lock       lock of the ``--shard I/N`` job writing its share of the blocks

A block is complete exactly when its completion record exists, names the run's parameter hash, and every
file it lists exists with the recorded size and sha256. Files are written to a temporary name in the same
directory, flushed to disk and renamed, so a killed process leaves either the old state or the new one,
never a half-written file under a final name.
"""
from __future__ import annotations

import errno
import fcntl
import hashlib
import json
import os
import socket
import tempfile
import time
import warnings
from contextlib import contextmanager
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
LOCK_FILE = "sweep.lock"
LOCK_DIR = "locks"
#: errno values that mean "the file system is full" (no space, or the user's quota is used up).
FULL_DISK_ERRNOS = frozenset({errno.ENOSPC, errno.EDQUOT})
#: errno values of file systems that do not implement flock (some network and FUSE file systems).
NO_LOCK_ERRNOS = frozenset({errno.ENOLCK, errno.EOPNOTSUPP, errno.ENOSYS})


class RunBusyError(UsageError):
    """Another sweep holds the run directory's lock (exit code 2, like any refused request)."""


class StorageFullError(RunIntegrityError):
    """The file system of the run directory is full; completed blocks are kept (exit code 1)."""


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
        if (path.is_dir() and not (path / MANIFEST).exists()
                and any(not _is_creation_leftover(entry) for entry in path.iterdir())):
            raise UsageError(
                f"output path {str(path)!r} is a non-empty directory without a cfsweep manifest; "
                "allowed: a new directory, an empty one, or a run directory of the same parameters"
            )

    @classmethod
    def create_or_resume(cls, path: Path, kind: str, params: dict, plan: list[dict],
                         block_kinds: list[str] | None = None, remove_stale_temp: bool = False) -> "RunStore":
        """Create the run directory, or reopen it if it holds a run with identical parameters.

        A directory holding a run with different parameters is refused, naming the parameters that differ.
        ``remove_stale_temp``: delete manifest temporary files of killed creators first; only for a caller
        holding the run's exclusive lock (shard jobs may be writing theirs at the same moment).
        """
        path = Path(path)
        cls.check_output_path(path)
        h = params_hash(params)
        manifest_path = path / MANIFEST
        if remove_stale_temp and path.is_dir():
            for leftover in path.glob(f".{MANIFEST}.*.tmp"):
                leftover.unlink(missing_ok=True)
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

    def block_by_id(self, block_id: str) -> dict:
        for block in self.plan:
            if block["id"] == block_id:
                return block
        raise UsageError(f"block {block_id!r} is not in the plan of run {str(self.path)!r}; "
                         f"allowed: {self.plan[0]['id']} .. {self.plan[-1]['id']}")

    def temp_files(self, block_ids=None) -> list[Path]:
        """Temporary files left in ``blocks/`` by killed writers (all, or those of ``block_ids``)."""
        found = sorted((self.path / BLOCK_DIR).glob(".*.tmp"))
        if block_ids is None:
            return found
        prefixes = tuple(f".{bid}." for bid in block_ids)
        return [p for p in found if p.name.startswith(prefixes)]

    def remove_temp_files(self, block_ids=None) -> int:
        """Delete leftover temporary files; only safe while holding the lock of those blocks."""
        removed = 0
        for path in self.temp_files(block_ids):
            try:
                path.unlink()
                removed += 1
            except FileNotFoundError:
                pass
        return removed

    def complete_count(self) -> int:
        """Blocks whose completion record and file sizes check out (no hashing: a quick count)."""
        return sum(s.state == "complete" for s in self.statuses(deep=False))

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


def _is_creation_leftover(entry: Path) -> bool:
    """What a sweep killed before its manifest was renamed into place can leave in a new directory."""
    name = entry.name
    if name == LOCK_FILE or (name == LOCK_DIR and entry.is_dir()):
        return True
    if name == BLOCK_DIR and entry.is_dir():
        return not any(entry.iterdir())
    return name.startswith(f".{MANIFEST}.") and name.endswith(".tmp")


# -- full disk ----------------------------------------------------------------------------------------
def is_full_disk(exc: BaseException) -> bool:
    return isinstance(exc, OSError) and exc.errno in FULL_DISK_ERRNOS


def full_disk_error(store_or_path, exc: OSError, block_id: str | None = None) -> StorageFullError:
    """A one-line StorageFullError: where, which block, how many blocks are safe, what to do."""
    path = store_or_path.path if isinstance(store_or_path, RunStore) else Path(store_or_path)
    where = f" (block {block_id})" if block_id else ""
    kept = ""
    if isinstance(store_or_path, RunStore):
        kept = f"; {store_or_path.complete_count()} of {len(store_or_path.plan)} blocks are complete and kept"
    return StorageFullError(
        f"no space left on the file system of {str(path)!r} while writing{where}: {exc.strerror}{kept}; "
        "free some space, then rerun the same command to resume"
    )


@contextmanager
def full_disk_as_error(store_or_path, block_id: str | None = None):
    """Turn ENOSPC/EDQUOT raised inside the block into a :class:`StorageFullError`."""
    try:
        yield
    except OSError as exc:
        if not is_full_disk(exc):
            raise
        raise full_disk_error(store_or_path, exc, block_id) from None


# -- locks --------------------------------------------------------------------------------------------
def _holder_text() -> str:
    return f"pid={os.getpid()} host={socket.gethostname()} since={time.strftime('%Y-%m-%dT%H:%M:%S')}\n"


def parse_holder(text: str) -> dict:
    """``pid=.. host=.. since=..`` as a dict (pid as int); {} for an empty or foreign text."""
    fields = dict(part.split("=", 1) for part in text.split() if "=" in part)
    if "pid" in fields:
        try:
            fields["pid"] = int(fields["pid"])
        except ValueError:
            return {}
    return fields


def _holder_alive(holder: dict) -> bool | None:
    """True/False when the holder runs on this host; None when that cannot be told from here."""
    if not holder.get("pid"):
        return None
    if holder.get("host") != socket.gethostname():
        return None
    try:
        os.kill(holder["pid"], 0)
    except ProcessLookupError:
        return False
    except PermissionError:
        return True
    return True


def _describe(holder: dict) -> str:
    if not holder.get("pid"):
        return "another process (pid not yet recorded)"
    return f"pid {holder['pid']} on {holder.get('host', '?')} since {holder.get('since', '?')}"


def lock_holders(run_dir: Path) -> list[dict]:
    """Recorded holders of a run's locks that may still be running (read only: never takes a lock).

    Holders write ``pid=.. host=.. since=..`` into their lock file and empty it when they finish; a
    holder killed with SIGKILL leaves its line behind, so lines whose pid is dead on this host are skipped.
    Each entry: pid, host, since, alive (True / None when on another host), lock (file name).
    """
    run_dir = Path(run_dir)
    files = [run_dir / LOCK_FILE] + sorted((run_dir / LOCK_DIR).glob("*.lock"))
    holders = []
    for path in files:
        try:
            holder = parse_holder(path.read_text())
        except (FileNotFoundError, UnicodeDecodeError):
            continue
        if not holder:
            continue
        alive = _holder_alive(holder)
        if alive is False:
            continue
        holders.append(dict(holder, alive=alive, lock=path.name))
    return holders


def _flock(fd: int, mode: int) -> bool:
    """Try to take a flock without waiting: True if taken, False if held elsewhere.

    On a file system without flock support the lock cannot protect anything: warn and go on.
    """
    try:
        fcntl.flock(fd, mode | fcntl.LOCK_NB)
        return True
    except BlockingIOError:
        return False
    except OSError as exc:
        if exc.errno not in NO_LOCK_ERRNOS:
            raise
        warnings.warn(f"file locks are not supported here ({exc.strerror}); cfsweep cannot stop two sweeps "
                      "of one run directory from running at once", RuntimeWarning, stacklevel=3)
        return True


def _record_holder(fd: int) -> None:
    try:
        os.ftruncate(fd, 0)
        os.pwrite(fd, _holder_text().encode(), 0)
    except OSError:
        pass  # best effort: a full disk must not stop the sweep from reporting its real error


def _clear_holder(fd: int) -> None:
    try:
        os.ftruncate(fd, 0)
    except OSError:
        pass


def shard_lock_name(shard: tuple[int, int]) -> str:
    return f"shard-{shard[0]}-of-{shard[1]}.lock"


@contextmanager
def sweep_lock(run_dir: Path, shard: tuple[int, int] | None = None):
    """Hold the run directory's lock for the duration of a sweep.

    A whole-run sweep takes ``sweep.lock`` exclusively. A ``--shard I/N`` job takes ``sweep.lock``
    shared (any number of shards run side by side, but not beside a whole-run sweep) and
    ``locks/shard-I-of-N.lock`` exclusively (the same shard twice is refused). A refused sweep raises
    :class:`RunBusyError` naming the holder's pid. Locks are ``fcntl.flock`` locks: the kernel drops
    them when the holder dies, however it dies. They are only as good as the file system's flock
    (see docs/cluster.md).
    """
    run_dir = Path(run_dir)
    run_dir.mkdir(parents=True, exist_ok=True)
    opened, recorded = [], []
    try:
        run_fd = os.open(run_dir / LOCK_FILE, os.O_RDWR | os.O_CREAT, 0o644)
        opened.append(run_fd)
        if not _flock(run_fd, fcntl.LOCK_EX if shard is None else fcntl.LOCK_SH):
            raise RunBusyError(_busy_message(run_dir, shard))
        if shard is None:
            _record_holder(run_fd)
            recorded.append(run_fd)
        else:
            # Holding it shared proves no whole-run sweep holds it: a holder line there is stale
            # (left by a sweep killed with SIGKILL).
            _clear_holder(run_fd)
            (run_dir / LOCK_DIR).mkdir(exist_ok=True)
            shard_fd = os.open(run_dir / LOCK_DIR / shard_lock_name(shard), os.O_RDWR | os.O_CREAT, 0o644)
            opened.append(shard_fd)
            if not _flock(shard_fd, fcntl.LOCK_EX):
                raise RunBusyError(_busy_message(run_dir, shard))
            _record_holder(shard_fd)
            recorded.append(shard_fd)
        yield
    finally:
        for fd in recorded:  # only the exclusive holder of a file may empty its holder line
            _clear_holder(fd)
        for fd in reversed(opened):
            os.close(fd)


def _busy_message(run_dir: Path, shard) -> str:
    holders = lock_holders(run_dir)
    whole = [h for h in holders if h["lock"] == LOCK_FILE]
    shards = [h for h in holders if h["lock"] != LOCK_FILE]
    if shard is not None and not whole and shards:
        mine = [h for h in shards if h["lock"] == shard_lock_name(shard)]
        who = _describe(mine[0]) if mine else "another process"
        return (f"run directory {str(run_dir)!r} is busy: shard {shard[0]}/{shard[1]} is already running "
                f"({who}); allowed: each --shard I/N once at a time")
    if whole:
        who = f"a sweep ({_describe(whole[0])})"
    elif shards:
        who = f"{len(shards)} shard job(s) (" + ", ".join(
            f"{h['lock'][6:-5].replace('-of-', '/')}: pid {h['pid']} on {h.get('host', '?')}" for h in shards) + ")"
    else:
        who = "another process (pid not yet recorded)"
    return (f"run directory {str(run_dir)!r} is busy: {who} holds its lock; allowed: one sweep of a run "
            "directory at a time, or --shard I/N jobs side by side")


def _shorten(items: list[str], n: int = 8) -> str:
    return ", ".join(items[:n]) + (f", ... (+{len(items) - n})" if len(items) > n else "")
