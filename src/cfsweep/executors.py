"""Executors: run the pending blocks of a plan and store them. One interface, one merge path.

Every executor ends in :func:`store_block` (compute, write files atomically, write the completion
record last), so the block files do not depend on where they were computed:

* ``run_local`` computes blocks one after another in this process, each with all Numba threads.
* ``run_dask`` submits one task per block to a Dask cluster (``--cluster tcp://HOST:PORT`` for a
  running scheduler, ``--cluster local:N`` for N worker processes on this machine). The task is
  :func:`execute_block`, run on a worker; workers write straight into the run directory, which must be on
  storage they all share (checked before the first task, see :func:`check_shared_storage`).
* ``--shard I/N`` (:func:`shard_blocks`) selects the blocks with index = I (mod N) for batch arrays;
  the selected blocks then run locally.

Threads (why: Numba kernels and Dask threads compete for the same cores). Workers whose processes run on
the same host with the same CPU affinity set share those cores; each Dask thread among them gets
``max(1, cores // dask_threads)`` Numba threads, where ``cores`` is the smaller of the affinity set and
the worker's ``NUMBA_NUM_THREADS``. On ``local:N`` (one Dask thread per worker) that is
``max(1, cores // N)``. An explicit ``threads`` overrides the rule on every worker.
"""
from __future__ import annotations

import os
import signal
import socket
import sys
import threading
import time
import uuid
from contextlib import contextmanager, nullcontext
from pathlib import Path

import numba
from tqdm import tqdm

from .blocks import compute_block
from .errors import UsageError
from .families import Family, parse_family
from .store import RunStore, full_disk_as_error

#: Seconds to wait for a Dask scheduler to answer, and for its first worker to join.
CONNECT_TIMEOUT_S = 20
WORKER_WAIT_S = 120
#: Attempts per block after an error raised by the task (lost workers are rescheduled by Dask anyway).
TASK_RETRIES = 3
MAX_SHARDS = 1_000_000


class Terminated(KeyboardInterrupt):
    """SIGTERM during a sweep; a KeyboardInterrupt so that every cleanup path treats it like Ctrl-C."""


@contextmanager
def interrupt_on_sigterm():
    """Turn SIGTERM into :class:`Terminated` in the main thread for the duration of a sweep.

    Batch schedulers (Slurm, PBS) stop jobs with SIGTERM; raising in the main thread lets temporary files
    be removed and locks be released exactly as for Ctrl-C. Outside the main thread this does nothing
    (signal handlers can only be installed there).
    """
    if threading.current_thread() is not threading.main_thread():
        yield
        return

    previous = signal.signal(signal.SIGTERM, _raise_terminated)
    try:
        yield
    finally:
        signal.signal(signal.SIGTERM, previous)


def _raise_terminated(signum, frame):
    raise Terminated("terminated by SIGTERM")


@contextmanager
def signals_deferred():
    """Hold Ctrl-C and SIGTERM while a Numba kernel runs; raise them as soon as it has returned.

    A KeyboardInterrupt raised while a compiled function is returning surfaces as a SystemError
    ("returned a result with an exception set"), which would look like a crash. Blocks are short by
    design (see :mod:`cfsweep.plan`), so deferring keeps interrupts prompt. Only the handlers that raise
    (Python's default Ctrl-C handler, and the SIGTERM handler of :func:`interrupt_on_sigterm`) are deferred;
    ignored signals stay ignored.
    """
    if threading.current_thread() is not threading.main_thread():
        yield
        return
    raising = {signal.SIGINT: signal.default_int_handler, signal.SIGTERM: _raise_terminated}
    held: list[int] = []
    previous = {}
    for signum, handler in raising.items():
        if signal.getsignal(signum) is handler:
            previous[signum] = signal.signal(signum, lambda n, f: held.append(n))
    try:
        yield
    finally:
        for signum, handler in previous.items():
            signal.signal(signum, handler)
    if held:
        if held[0] == signal.SIGTERM:
            raise Terminated("terminated by SIGTERM")
        raise KeyboardInterrupt


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
    """Compute one block and write it (files first, completion record last). Returns the record.

    If writing fails part way (full disk, interrupt), the files already renamed into place are removed
    again so that the block reads as missing rather than bad; a block whose record made it is kept.
    """
    p = store.params
    if p["kind"] == "sample":
        from .sampled import compute_sample_block

        with signals_deferred():
            tables, record = compute_sample_block(p, block, threads)
        record.update(q_lo=block["q_lo"], q_hi=block["q_hi"], finished_unix=time.time())
        store.write_block(block["id"], tables, record)
        return record
    with signals_deferred():
        result = compute_block(family, block["q_lo"], block["q_hi"], p["cap"], p["words"], threads, goodness=p)
    record = {
        "members": result.members,
        "partial_quotients": result.partial_quotients,
        "q_lo": block["q_lo"],
        "q_hi": block["q_hi"],
        "kernel_seconds": round(result.seconds, 6),
        "finished_unix": time.time(),
    }
    try:
        with full_disk_as_error(store, block["id"]):
            store.write_block(block["id"], result.tables, record)
    except BaseException:
        if not store.done_file(block["id"]).exists():
            store.discard_block(block["id"])
        raise
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


# -- shards ------------------------------------------------------------------------------------------
def parse_shard(text) -> tuple[int, int] | None:
    """``"I/N"`` -> (I, N) with 0 <= I < N <= 10^6; None stays None (no sharding)."""
    if text is None:
        return None
    if isinstance(text, tuple) and len(text) == 2:
        index, count = text
    else:
        head, sep, tail = str(text).strip().partition("/")
        try:
            index, count = int(head), int(tail)
        except ValueError:
            index = count = None
        if not sep or index is None:
            raise UsageError(f"--shard {text!r} is not of the form I/N; allowed: I/N with 0 <= I < N, "
                             "e.g. 0/8 ... 7/8 for an array of 8 jobs")
    if not (1 <= count <= MAX_SHARDS):
        raise UsageError(f"--shard {index}/{count}: N = {count} is out of range; allowed: 1 <= N <= {MAX_SHARDS}")
    if not (0 <= index < count):
        raise UsageError(f"--shard {index}/{count}: I = {index} is out of range; allowed: 0 <= I <= {count - 1}")
    return index, count


def shard_blocks(plan: list[dict], shard: tuple[int, int] | None) -> list[dict]:
    """The blocks of ``plan`` whose index is congruent to I mod N (all of them without a shard)."""
    if shard is None:
        return list(plan)
    index, count = shard
    return [b for b in plan if b["index"] % count == index]


# -- Dask ----------------------------------------------------------------------------------------------
def parse_cluster(spec):
    """Check a ``--cluster`` value: ``("local", N)``, ``("address", "tcp://HOST:PORT")``, or a Client."""
    if spec is None:
        return None
    if not isinstance(spec, str):
        if hasattr(spec, "submit") and hasattr(spec, "scheduler_info"):
            return ("client", spec)
        raise UsageError(f"--cluster {spec!r} is neither text nor a distributed.Client; allowed: "
                         "tcp://HOST:PORT or local:N")
    text = spec.strip()
    if text.startswith("local:"):
        cores = os.cpu_count() or 1
        try:
            n = int(text[len("local:"):])
        except ValueError:
            raise UsageError(f"--cluster {spec!r}: N is not an integer; allowed: local:N with "
                             f"1 <= N <= {cores} (the cores of this machine)") from None
        if not (1 <= n <= cores):
            raise UsageError(f"--cluster {spec!r}: N = {n} is out of range; allowed: local:N with "
                             f"1 <= N <= {cores} (the cores of this machine)")
        return ("local", n)
    if text.startswith("tcp://"):
        host, sep, port = text[len("tcp://"):].rpartition(":")
        if sep and host and port.isdigit() and 1 <= int(port) <= 65535:
            return ("address", text)
    raise UsageError(f"--cluster {spec!r} is not understood; allowed: tcp://HOST:PORT (a running Dask "
                     "scheduler, port 1..65535) or local:N (N worker processes on this machine)")


def _import_distributed():
    try:
        import distributed
    except ImportError:
        raise UsageError("--cluster needs the Dask distributed package; install it with "
                         "pip install 'cfsweep[cluster]'") from None
    return distributed


@contextmanager
def dask_client(spec):
    """A connected distributed.Client for a parsed ``--cluster`` value (closed afterwards if ours)."""
    distributed = _import_distributed()
    kind, value = spec
    if kind == "client":
        yield value
        return
    if kind == "local":
        # One Dask thread per worker process; Numba threads fill the cores (see the module docstring).
        cluster = distributed.LocalCluster(n_workers=value, threads_per_worker=1, processes=True,
                                           dashboard_address=":0", silence_logs=40)
        try:
            with distributed.Client(cluster) as client:
                yield client
        finally:
            cluster.close()
        return
    try:
        client = distributed.Client(value, timeout=f"{CONNECT_TIMEOUT_S}s")
    except (OSError, TimeoutError) as exc:
        raise UsageError(f"--cluster {value!r}: no Dask scheduler answered within {CONNECT_TIMEOUT_S} s "
                         f"({type(exc).__name__}); allowed: the address of a running scheduler") from None
    try:
        try:
            client.wait_for_workers(1, timeout=WORKER_WAIT_S)
        except (TimeoutError, OSError):
            raise UsageError(f"--cluster {value!r}: the scheduler has no workers after {WORKER_WAIT_S} s; "
                             "start some (dask worker ADDRESS) and rerun") from None
        yield client
    finally:
        client.close()


def _cpu_set() -> list[int]:
    try:
        return sorted(os.sched_getaffinity(0))
    except AttributeError:  # not Linux
        return list(range(os.cpu_count() or 1))


def core_group_key() -> str:
    """Workers with equal keys share cores: same host, same CPU affinity set."""
    return f"{socket.gethostname()}|{','.join(map(str, _cpu_set()))}"


def _probe_worker(run_dir: str, probe_name: str, token: str, dask_worker=None) -> dict:
    """Runs on every worker: read the client's token, answer with a file, describe this worker."""
    from . import __version__

    info = {
        "host": socket.gethostname(),
        "pid": os.getpid(),
        "nthreads": int(dask_worker.state.nthreads) if dask_worker is not None else 1,
        "cores": min(len(_cpu_set()), numba.config.NUMBA_NUM_THREADS),
        "group": core_group_key(),
        "version": __version__,
        "sees_run_dir": False,
        "reason": "",
    }
    probe = Path(run_dir) / probe_name
    try:
        seen = probe.read_text()
    except OSError as exc:
        info["reason"] = f"cannot read {probe}: {exc.strerror or exc}"
        return info
    if seen != token:
        info["reason"] = f"{probe} holds other content than the client wrote (a different directory)"
        return info
    try:
        (Path(run_dir) / f"{probe_name}.{info['host']}.{info['pid']}").write_text(token)
    except OSError as exc:
        info["reason"] = f"cannot write into {run_dir}: {exc.strerror or exc}"
        return info
    info["sees_run_dir"] = True
    return info


def check_shared_storage(client, run_dir: Path) -> dict[str, dict]:
    """Check that every connected worker reads and writes the run directory the client sees.

    The client writes a random token into the run directory; each worker must read it back and write an
    answer file that the client then finds. Raises a one-line UsageError naming the first worker that
    fails. Returns the workers' descriptions keyed by worker address.
    """
    from . import __version__

    run_dir = Path(run_dir)
    token = uuid.uuid4().hex
    probe_name = f".probe-{token[:16]}"
    probe = run_dir / probe_name
    probe.write_text(token)
    try:
        infos = client.run(_probe_worker, str(run_dir), probe_name, token)
        for address, info in sorted(infos.items()):
            if info["version"] != __version__:
                raise UsageError(f"Dask worker {address} runs cfsweep {info['version']}, this client "
                                 f"{__version__}; allowed: the same cfsweep version on client and workers")
            answer = run_dir / f"{probe_name}.{info['host']}.{info['pid']}"
            if info["sees_run_dir"] and not answer.exists():
                info["sees_run_dir"] = False
                info["reason"] = f"its answer file {answer.name} did not appear here"
            if not info["sees_run_dir"]:
                raise UsageError(
                    f"Dask worker {address} (host {info['host']}) cannot use the run directory "
                    f"{str(run_dir)!r}: {info['reason']}; allowed: a run directory on storage shared by the "
                    "client and every worker (a network file system path, the same on all hosts)"
                )
        return infos
    finally:
        for path in run_dir.glob(f"{probe_name}*"):
            path.unlink(missing_ok=True)


def numba_threads_by_group(infos: dict[str, dict]) -> dict[str, int]:
    """The thread rule of the module docstring: Numba threads per Dask thread, per core group."""
    dask_threads: dict[str, int] = {}
    cores: dict[str, int] = {}
    for info in infos.values():
        dask_threads[info["group"]] = dask_threads.get(info["group"], 0) + info["nthreads"]
        cores[info["group"]] = info["cores"]
    return {g: max(1, cores[g] // dask_threads[g]) for g in dask_threads}


def _task_threads(threads) -> int:
    """Numba threads for this task on this worker: explicit, by core group, or this worker alone."""
    limit = numba.config.NUMBA_NUM_THREADS
    if isinstance(threads, int):
        return max(1, min(threads, limit))
    if isinstance(threads, dict) and core_group_key() in threads:
        return max(1, min(threads[core_group_key()], limit))
    # A worker that joined after the check (or a restarted one on a new cpu set): share its own cores
    # among its own Dask threads.
    try:
        from distributed import get_worker

        nthreads = int(get_worker().state.nthreads)
    except (ImportError, ValueError, AttributeError):
        nthreads = 1
    return max(1, min(len(_cpu_set()), limit) // max(1, nthreads))


_KERNEL_LOCK = threading.Lock()


def _kernel_guard():
    """Serialise kernels of one worker process unless Numba's threading layer is known to be thread-safe.

    The ``workqueue`` layer aborts the process when two threads launch parallel kernels at once; which
    layer is active is only known after the first launch, so the first block of a process is serialised.
    """
    try:
        layer = numba.threading_layer()
    except ValueError:
        return _KERNEL_LOCK
    return nullcontext() if layer in ("tbb", "omp") else _KERNEL_LOCK


def execute_block(run_dir: str, block_id: str, threads=None) -> dict:
    """Worker-side task: compute and store one block of the run in ``run_dir``; return its record.

    A block that is already complete (e.g. written by a worker that was then lost) is not recomputed;
    its record is returned. ``threads``: Numba threads as an int, a mapping from core-group key to
    threads (see the module docstring), or None for this worker's own cores.
    """
    store = RunStore.open(Path(run_dir))
    block = store.block_by_id(block_id)
    if store.check_block(block).state == "complete":
        return store.read_record(block_id)
    family = parse_family(store.params["family"])
    with _kernel_guard(), numba_threads(_task_threads(threads)) as n_threads:
        return store_block(store, block, family, n_threads)


def task_key(store: RunStore, block_id: str, call_id: str) -> str:
    """Dask key of a block's task: parameters, block id, and this call (so two runs never share keys)."""
    return f"cfsweep-{store.manifest['params_hash'][:12]}-{block_id}-{call_id}"


def run_dask(store: RunStore, pending: list[dict], cluster, threads: int | None = None,
             quiet: bool = False) -> None:
    """Run the pending blocks as one Dask task each on ``cluster`` (parsed or raw ``--cluster`` value)."""
    spec = parse_cluster(cluster) if not isinstance(cluster, tuple) else cluster
    if not pending:
        return
    distributed = _import_distributed()
    run_dir = str(store.path.resolve())
    with dask_client(spec) as client:
        infos = check_shared_storage(client, Path(run_dir))
        plan_threads = threads if threads is not None else numba_threads_by_group(infos)
        call_id = uuid.uuid4().hex[:8]
        futures = [client.submit(execute_block, run_dir, block["id"], plan_threads, pure=False,
                                 key=task_key(store, block["id"], call_id), retries=TASK_RETRIES)
                   for block in pending]
        try:
            with progress_bar(len(pending), quiet, f"sweep on {len(infos)} workers") as bar:
                t0 = time.perf_counter()
                pqs = 0
                for future in distributed.as_completed(futures):
                    record = future.result()
                    pqs += record["partial_quotients"]
                    elapsed = time.perf_counter() - t0
                    bar.set_postfix_str(f"{pqs / max(elapsed, 1e-9):.3g} pq/s", refresh=False)
                    bar.update(1)
        except BaseException:
            client.cancel(futures)
            raise
        finally:
            del futures


__all__ = ["run_local", "run_dask", "execute_block", "store_block", "parse_shard", "shard_blocks",
           "parse_cluster", "check_shared_storage", "numba_threads_by_group", "interrupt_on_sigterm",
           "signals_deferred",
           "Terminated", "numba_threads", "progress_bar"]
