"""Dask executor on real worker processes (one LocalCluster per module), shared-storage checks, the Slurm
examples, and bad --cluster values.

The layer below (local sweeps) is the reference: cluster runs must give the same integers and even the
same block file bytes.
"""
from __future__ import annotations

import hashlib
import importlib.util
import os
import shutil
import signal
import subprocess
import sys
import threading
from pathlib import Path

import pytest

distributed = pytest.importorskip("distributed")

from cfsweep import open_run, sweep  # noqa: E402
from cfsweep import executors  # noqa: E402
from cfsweep.cli import main  # noqa: E402
from cfsweep.errors import UsageError  # noqa: E402

from test_faults import assert_blocks_exact, done_count, integer_table, temp_files, wait_for  # noqa: E402

PARAMS = dict(max_den=1500, cap=8, words=3, blocks=16)
ROOT = Path(__file__).resolve().parent.parent


def cli_args(out, params=PARAMS):
    args = ["sweep", "--out", str(out), "--quiet"]
    for key, value in params.items():
        args += [f"--{key.replace('_', '-')}", str(value)]
    return args


def block_hashes(run_dir: Path) -> dict[str, str]:
    return {p.name: hashlib.sha256(p.read_bytes()).hexdigest()
            for p in sorted((Path(run_dir) / "blocks").glob("*.parquet"))}


@pytest.fixture(scope="module")
def client():
    cluster = distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                                       dashboard_address=":0", silence_logs=40)
    with distributed.Client(cluster) as c:
        yield c
    cluster.close()


@pytest.fixture(scope="module")
def local_reference(tmp_path_factory):
    run = sweep(out=tmp_path_factory.mktemp("ref") / "local", **PARAMS)
    return {"table": integer_table(run), "hashes": block_hashes(run.path)}


def test_dask_run_equals_local_run(client, local_reference, tmp_path):
    run = sweep(out=tmp_path / "api", cluster=client, **PARAMS)
    assert integer_table(run) == local_reference["table"]
    assert block_hashes(run.path) == local_reference["hashes"]  # byte-for-byte the same block files
    assert_blocks_exact(run.path)
    # The same through the command line and the scheduler's address.
    out = tmp_path / "cli"
    assert main(cli_args(out) + ["--cluster", client.scheduler.address]) == 0
    assert block_hashes(out) == local_reference["hashes"]
    # Rerunning a complete run submits nothing and changes nothing.
    records = {p.name: p.read_bytes() for p in (out / "blocks").glob("*.done.json")}
    assert main(cli_args(out) + ["--cluster", client.scheduler.address]) == 0
    assert {p.name: p.read_bytes() for p in (out / "blocks").glob("*.done.json")} == records


def test_thread_rule_divides_cores_among_dask_threads(client, tmp_path):
    run_dir = tmp_path / "probe"
    run_dir.mkdir()
    infos = executors.check_shared_storage(client, run_dir)
    assert len(infos) == 2 and all(i["sees_run_dir"] for i in infos.values())
    assert list(run_dir.iterdir()) == []  # probe files removed
    rule = executors.numba_threads_by_group(infos)
    cores = min(len(os.sched_getaffinity(0)), executors.numba.config.NUMBA_NUM_THREADS)
    # Two single-threaded workers on this host and cpu set: max(1, cores // 2) Numba threads each.
    assert rule == {executors.core_group_key(): max(1, cores // 2)}
    seen = client.run(executors._task_threads, rule)
    assert set(seen.values()) == {max(1, cores // 2)}


def test_worker_killed_mid_run_still_identical(client, local_reference, tmp_path):
    out = tmp_path / "r"
    errors = []

    def run():
        try:
            sweep(out=out, cluster=client, **PARAMS)
        except BaseException as exc:  # reported below
            errors.append(exc)

    thread = threading.Thread(target=run)
    thread.start()
    assert wait_for(lambda: done_count(out) >= 2), "no block finished"
    busy = {w: keys for w, keys in client.processing().items() if keys}
    assert busy and done_count(out) < PARAMS["blocks"], "the kill came too late to test anything"
    victim = sorted(busy)[0]
    pid = client.run(os.getpid, workers=[victim])[victim]
    os.kill(pid, signal.SIGKILL)
    thread.join(timeout=180)
    assert not thread.is_alive() and not errors, errors
    run = open_run(out)
    assert integer_table(run) == local_reference["table"]
    assert block_hashes(out) == local_reference["hashes"]
    assert_blocks_exact(out)
    assert temp_files(out) == []
    client.wait_for_workers(2, timeout=60)  # the nanny restarts the killed worker for the next tests


def test_worker_that_cannot_see_the_run_directory_is_named(client, tmp_path, capsys):
    """A real worker process in its own mount namespace, where the run's parent is an empty tmpfs."""
    hidden = tmp_path / "shared"
    hidden.mkdir()
    probe = subprocess.run(["unshare", "-m", "true"], capture_output=True, text=True)
    if probe.returncode != 0:
        pytest.skip(f"cannot create a mount namespace here (needs root): {probe.stderr.strip()}")
    before = set(client.scheduler_info()["workers"])
    script = (f"mount -t tmpfs tmpfs {hidden} && exec {sys.executable} -m distributed.cli.dask_worker "
              f"{client.scheduler.address} --nthreads 1 --no-nanny --no-dashboard --name blind")
    worker = subprocess.Popen(["unshare", "-m", "sh", "-c", script], stdout=subprocess.DEVNULL,
                              stderr=subprocess.DEVNULL)
    try:
        assert wait_for(lambda: len(client.scheduler_info()["workers"]) == len(before) + 1, timeout=60)
        blind = (set(client.scheduler_info()["workers"]) - before).pop()
        out = hidden / "run"
        assert main(cli_args(out, dict(PARAMS, max_den=300)) + ["--cluster", client.scheduler.address]) == 2
        err = capsys.readouterr().err
        assert err.count("\n") == 1 and f"Dask worker {blind}" in err and "cannot use the run directory" in err
        assert str(out) in err
        status = open_run(out).statuses()
        assert {s.state for s in status} == {"missing"}  # nothing was submitted
        assert [p.name for p in out.iterdir() if p.name.startswith(".probe")] == []
    finally:
        worker.terminate()
        worker.wait(timeout=30)
    assert wait_for(lambda: set(client.scheduler_info()["workers"]) == before, timeout=30)


def test_cli_local_cluster(local_reference, tmp_path):
    out = tmp_path / "r"
    assert main(cli_args(out) + ["--cluster", "local:2"]) == 0
    assert block_hashes(out) == local_reference["hashes"]


@pytest.mark.parametrize("value,needle", [
    ("local:0", "1 <= N <= "),
    (f"local:{(os.cpu_count() or 1) + 1}", "1 <= N <= "),
    ("local:two", "N is not an integer"),
    ("tcp://nohost", "tcp://HOST:PORT"),
    ("tcp://host:99999", "port 1..65535"),
    ("dask", "is not understood"),
])
def test_bad_cluster_values(tmp_path, capsys, value, needle):
    out = tmp_path / "never"
    assert main(cli_args(out, dict(PARAMS, max_den=50)) + ["--cluster", value]) == 2
    err = capsys.readouterr().err
    assert needle in err and value in err and err.count("\n") == 1
    assert not out.exists()


def test_shard_and_cluster_exclude_each_other(tmp_path, capsys):
    out = tmp_path / "never"
    assert main(cli_args(out, dict(PARAMS, max_den=50)) + ["--cluster", "local:1", "--shard", "0/2"]) == 2
    assert "exclude each other" in capsys.readouterr().err
    assert not out.exists()


def test_unreachable_scheduler(tmp_path, monkeypatch):
    monkeypatch.setattr(executors, "CONNECT_TIMEOUT_S", 2)
    with pytest.raises(UsageError, match="no Dask scheduler answered within 2 s"):
        sweep(out=tmp_path / "r", cluster="tcp://127.0.0.1:9", **dict(PARAMS, max_den=50))
    assert {s.state for s in open_run(tmp_path / "r").statuses()} == {"missing"}


# -- Slurm examples -------------------------------------------------------------------------------------
def load_example(name: str):
    spec = importlib.util.spec_from_file_location(name, ROOT / "examples" / f"{name}.py")
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


def test_slurm_dask_example_job_script():
    pytest.importorskip("dask_jobqueue")
    example = load_example("slurm_dask")
    cluster = example.make_cluster(cores=12, memory="24GB", walltime="06:30:00", queue="cpu", account="nt")
    try:
        script = cluster.job_script()  # rendered only; nothing is submitted
    finally:
        cluster.close()
    lines = script.splitlines()
    for directive in ("#SBATCH --cpus-per-task=12", "#SBATCH -t 06:30:00", "#SBATCH -p cpu", "#SBATCH -A nt",
                      "#SBATCH -n 1", "export NUMBA_NUM_THREADS=12"):
        assert directive in lines, directive
    assert any(line.startswith("#SBATCH --mem=") for line in lines)
    worker_line = next(line for line in lines if "distributed.cli.dask_worker" in line)
    assert "--nthreads 1" in worker_line  # one Dask thread per job: Numba gets the job's 12 cores


def test_slurm_array_example_runs_as_three_shards(local_reference, tmp_path, capsys):
    out = tmp_path / "array"
    env = dict(os.environ, MAX_DEN=str(PARAMS["max_den"]), CAP=str(PARAMS["cap"]), WORDS=str(PARAMS["words"]),
               BLOCKS=str(PARAMS["blocks"]), OUT=str(out), CFSWEEP=f"{sys.executable} -m cfsweep",
               SLURM_ARRAY_TASK_COUNT="3", SLURM_CPUS_PER_TASK="1")
    script = ROOT / "examples" / "slurm_array.sh"
    for task in (0, 2):
        subprocess.run(["bash", str(script)], env=dict(env, SLURM_ARRAY_TASK_ID=str(task)), check=True,
                       stdout=subprocess.DEVNULL)
    assert main(["table", str(out)]) == 1  # shard 1 of 3 has not run: refused, naming its blocks
    missing = [f"{i:06d}" for i in range(PARAMS["blocks"]) if i % 3 == 1]
    err = capsys.readouterr().err
    assert all(bid in err for bid in missing), err
    subprocess.run(["bash", str(script)], env=dict(env, SLURM_ARRAY_TASK_ID="1"), check=True,
                   stdout=subprocess.DEVNULL)
    assert block_hashes(out) == local_reference["hashes"]
    assert integer_table(open_run(out)) == local_reference["table"]


def test_slurm_array_example_refuses_outside_slurm(tmp_path):
    env = {k: v for k, v in os.environ.items() if not k.startswith("SLURM_")}
    proc = subprocess.run(["bash", str(ROOT / "examples" / "slurm_array.sh")], env=dict(env, OUT=str(tmp_path / "r")),
                          capture_output=True, text=True)
    assert proc.returncode != 0 and "Slurm array task" in proc.stderr
    assert not (tmp_path / "r").exists()


if shutil.which("sbatch"):  # pragma: no cover - only on a real cluster
    def test_sbatch_accepts_the_array_script():
        proc = subprocess.run(["sbatch", "--test-only", str(ROOT / "examples" / "slurm_array.sh")],
                              capture_output=True, text=True)
        assert proc.returncode == 0, proc.stderr


def test_progress_bar_counts_blocks_in_cluster_mode(client, tmp_path):
    """The CLI on a real terminal (a pty): the bar advances as futures complete, up to all blocks."""
    import fcntl
    import pty
    import struct
    import termios

    master, slave = pty.openpty()
    fcntl.ioctl(slave, termios.TIOCSWINSZ, struct.pack("HHHH", 24, 120, 0, 0))  # a terminal has a size
    cmd = [sys.executable, "-m", "cfsweep"] + [a for a in cli_args(tmp_path / "r") if a != "--quiet"] + [
        "--cluster", client.scheduler.address]
    proc = subprocess.Popen(cmd, stdin=slave, stdout=slave, stderr=slave, close_fds=True)
    os.close(slave)
    chunks = []
    while True:
        try:
            data = os.read(master, 4096)
        except OSError:  # the pty closes when the process exits
            break
        if not data:
            break
        chunks.append(data)
    proc.wait(timeout=120)
    os.close(master)
    text = b"".join(chunks).decode(errors="replace")
    assert proc.returncode == 0, text
    n = PARAMS["blocks"]
    assert "sweep on 2 workers" in text and f"{n}/{n}" in text and "pq/s" in text
    assert f"{n} blocks complete" in text


def test_sigterm_of_a_cluster_client_then_resume(client, local_reference, tmp_path):
    out = tmp_path / "r"
    cmd = [sys.executable, "-m", "cfsweep"] + cli_args(out, dict(PARAMS, blocks=48)) + [
        "--cluster", client.scheduler.address]
    proc = subprocess.Popen(cmd, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True)
    assert wait_for(lambda: done_count(out) >= 2, timeout=120), "no block finished"
    proc.send_signal(signal.SIGTERM)
    _, err = proc.communicate(timeout=60)
    assert proc.returncode == 130, err
    assert "interrupted" in err.splitlines()[-1]
    assert done_count(out) < 48, "the signal came too late to test anything"
    # Tasks that were already running finish on their workers; wait until the cluster is idle.
    assert wait_for(lambda: not any(client.processing().values()), timeout=60)
    run = sweep(out=out, cluster=client, **dict(PARAMS, blocks=48))
    assert integer_table(run) == local_reference["table"]  # other block count, same integers
    assert_blocks_exact(out)
    assert temp_files(out) == []
