"""Run a cfsweep sweep on a Slurm cluster through dask-jobqueue.

Each Slurm job starts one Dask worker with one Dask thread that books ``--cores`` CPUs; cfsweep gives
that thread all of them as Numba threads (see docs/cluster.md, "Threads"). The run directory must be
on storage that the login node and every compute node mount at the same path.

Example, from a login node where cfsweep is installed (same environment on the compute nodes)::

    python examples/slurm_dask.py --max-den 2e6 --out /shared/runs/q2e6 \\
        --jobs 16 --cores 32 --memory 32GB --walltime 12:00:00 --queue cpu

Rerunning the same command resumes; ``cfsweep status /shared/runs/q2e6`` shows progress meanwhile.
"""
from __future__ import annotations

import argparse


def make_cluster(cores: int, memory: str, walltime: str, queue: str | None = None,
                 account: str | None = None, log_directory: str | None = None):
    """A dask_jobqueue.SLURMCluster whose jobs each run one single-threaded worker on ``cores`` CPUs.

    ``cores``: CPUs booked per job (``--cpus-per-task``), all used by Numba; ``memory``: per job, e.g.
    "32GB"; ``walltime``: "HH:MM:SS". No job is submitted until ``cluster.scale(jobs=...)``.
    """
    from dask_jobqueue import SLURMCluster

    return SLURMCluster(
        cores=1,               # Dask threads per job: one block at a time per worker ...
        processes=1,           # ... in one worker process per job ...
        job_cpu=cores,         # ... which books all the job's cores for the Numba kernel
        memory=memory,
        walltime=walltime,
        queue=queue,
        account=account,
        log_directory=log_directory,
        job_script_prologue=[f"export NUMBA_NUM_THREADS={cores}"],
    )


def main(argv=None) -> int:
    import cfsweep
    from cfsweep.status import render_status, run_status

    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--max-den", required=True)
    ap.add_argument("--family", default="all")
    ap.add_argument("--words", default="3")
    ap.add_argument("--cap", default="32")
    ap.add_argument("--out", required=True, help="run directory on shared storage")
    ap.add_argument("--jobs", type=int, default=4, help="Slurm jobs (= Dask workers)")
    ap.add_argument("--cores", type=int, default=16, help="CPUs per job")
    ap.add_argument("--memory", default="16GB", help="memory per job")
    ap.add_argument("--walltime", default="04:00:00")
    ap.add_argument("--queue", default=None, help="Slurm partition")
    ap.add_argument("--account", default=None)
    args = ap.parse_args(argv)

    cluster = make_cluster(args.cores, args.memory, args.walltime, args.queue, args.account,
                           log_directory="dask-logs")
    try:
        cluster.scale(jobs=args.jobs)
        # cfsweep connects to the scheduler by its address, exactly as `--cluster tcp://...` does.
        cfsweep.sweep(args.max_den, args.out, family=args.family, words=args.words, cap=args.cap,
                      cluster=cluster.scheduler_address, quiet=False)
    finally:
        cluster.close()
    print(render_status(run_status(args.out)))
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
