"""Command line: a thin face over the Python API (``cfsweep --help``).

Exit codes: 0 success; 2 bad input (one line naming the value and the allowed range), including a run
directory that another sweep is writing; 1 a run that is incomplete or inconsistent, or a full disk
(completed blocks are kept); 130 interrupted by Ctrl-C or SIGTERM (completed blocks are kept; rerun to
resume).
"""
from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

from .errors import RunIntegrityError, UsageError
from .families import __doc__ as FAMILY_DOC

FAMILY_HELP = ("family of fractions (default all): all | reduced | squarefree | prime | "
               "num=CLASS,den=CLASS with CLASS any|squarefree|prime, combinable with all/reduced, "
               "e.g. 'reduced,den=squarefree'")


class _Parser(argparse.ArgumentParser):
    def error(self, message):  # one line, exit code 2, as for every other bad input
        raise UsageError(message)


def _add_sweep(sub):
    p = sub.add_parser("sweep", help="sweep every member p/q with min-den <= q <= max-den into a run directory",
                       description="Exhaustive sweep into Parquet block files. Rerunning the same command "
                                   "resumes; other parameters into the same directory are refused.")
    p.add_argument("--max-den", required=True, help="largest denominator Q (2 .. 2^31-1; 2e4 notation allowed)")
    p.add_argument("--min-den", default="2", help="smallest denominator (2 .. max-den; default 2)")
    p.add_argument("--family", default="all", help=FAMILY_HELP)
    p.add_argument("--words", default="3", help="longest word length K counted (default 3)")
    p.add_argument("--cap", default="32", help="digits >= cap are pooled as 'cap+' (2 .. 65536; default 32)")
    p.add_argument("--blocks", default=None, help="number of blocks (default: by estimated work)")
    p.add_argument("--threads", default=None, help="Numba threads (default: all cores; with --cluster: "
                   "per task, default cores divided among the Dask threads of a host)")
    p.add_argument("--out", required=True, help="run directory (created; resumed if it holds the same run)")
    p.add_argument("--cluster", default=None, help="run the blocks on Dask: tcp://HOST:PORT (a running "
                   "scheduler; the run directory must be shared with its workers) or local:N (N worker "
                   "processes here); see docs/cluster.md")
    p.add_argument("--shard", default=None, help="I/N: compute only the blocks with index = I (mod N), "
                   "0 <= I < N, for job arrays; the run is complete once all N shards have run")
    p.add_argument("--quiet", action="store_true", help="no progress bar")
    p.set_defaults(func=_cmd_sweep)


def _cmd_sweep(args) -> int:
    from .runs import sweep

    t0 = time.perf_counter()
    run = sweep(args.max_den, args.out, min_den=args.min_den, family=args.family, cap=args.cap,
                words=args.words, blocks=args.blocks, threads=args.threads, quiet=args.quiet,
                cluster=args.cluster, shard=args.shard)
    seconds = time.perf_counter() - t0
    records = [r for r in (run.store.read_record(b["id"]) for b in run.store.plan) if r is not None]
    members = sum(r["members"] for r in records)
    pqs = sum(r["partial_quotients"] for r in records)
    of = "" if len(records) == len(run.store.plan) else f" of {len(run.store.plan)}"
    shard = f" (shard {args.shard})" if args.shard else ""
    print(f"run {run.path}{shard}: family {run.params['family']}, {len(records)}{of} blocks complete, "
          f"{members:,} fractions, {pqs:,} partial quotients ({seconds:.1f} s for this call)")
    if of:
        print(f"next: the other shards, then cfsweep table {run.path} (progress: cfsweep status {run.path})")
    else:
        print(f"next: cfsweep table {run.path}")
    return 0


def _add_status(sub):
    p = sub.add_parser("status", help="blocks complete/missing/bad, work done, throughput and ETA of a run",
                       description="Reads the manifest and completion records (verifying block files by "
                                   "sha256 unless --quick); safe while a sweep or shard jobs are running.")
    p.add_argument("run", help="run directory")
    p.add_argument("--json", action="store_true", help="print the status as one JSON object")
    p.add_argument("--quick", action="store_true", help="check block files by size only, not sha256")
    p.set_defaults(func=_cmd_status)


def _cmd_status(args) -> int:
    import json

    from .status import render_status, run_status

    status = run_status(args.run, deep=not args.quick)
    print(json.dumps(status, indent=2, sort_keys=True) if args.json else render_status(status))
    return 0


def _add_table(sub):
    p = sub.add_parser("table", help="merge a run's blocks and print its frequency table",
                       description="Verifies every block, merges them, prints the summary and the table, "
                                   "and writes tables/frequency.parquet, tables/convergence.parquet and "
                                   "tables/summary.json into the run directory.")
    p.add_argument("run", help="run directory")
    p.add_argument("--csv", default=None, help="also write the full table as CSV to this file")
    p.add_argument("--markdown", action="store_true", help="print the table as Markdown")
    p.add_argument("--top", default="10", help="words shown per length k >= 2 (default 10; all digits shown)")
    p.add_argument("--all-rows", action="store_true", help="print every row")
    p.set_defaults(func=_cmd_table)


def _cmd_table(args) -> int:
    from .report import render_markdown, render_summary, render_text, select_rows, write_csv
    from .runs import open_run
    from .tables import analyse, write_run_tables
    from .validate import check_range, parse_int

    top = check_range(parse_int(args.top, "--top"), "--top", 0, 10**9)
    if args.csv is not None and Path(args.csv).is_dir():
        raise UsageError(f"--csv {args.csv!r} is a directory; allowed: a file path")
    run = open_run(args.run)
    table, info, conv = analyse(run)
    paths = write_run_tables(run.path, table, info, conv)
    if args.csv:
        write_csv(table, args.csv)
    shown = select_rows(table, None if args.all_rows else top)
    print(render_summary(info))
    print()
    print(render_markdown(shown) if args.markdown else render_text(shown))
    if shown.num_rows < table.num_rows:
        print(f"({shown.num_rows} of {table.num_rows} rows shown; all rows in {paths['frequency']})")
    return 0


def _add_demo(sub):
    p = sub.add_parser("demo", help="run the embedded demo scenario and write its figures")
    p.add_argument("--out", default="demo-output", help="folder for the demo runs and figures")
    p.add_argument("--max-den", default=None, help="override the demo's denominator bound")
    p.set_defaults(func=_cmd_demo)


def _cmd_demo(args) -> int:
    from .demo import run_demo

    run_demo(Path(args.out), max_den=args.max_den)
    return 0


def build_parser() -> argparse.ArgumentParser:
    parser = _Parser(prog="cfsweep", description="Continued-fraction statistics of rationals against the "
                     "Gauss measure: exhaustive sweeps, exact counts, frequency tables.",
                     epilog=FAMILY_DOC, formatter_class=argparse.RawDescriptionHelpFormatter)
    sub = parser.add_subparsers(dest="command", required=True, parser_class=_Parser)
    _add_sweep(sub)
    _add_table(sub)
    _add_status(sub)
    _add_demo(sub)
    for name in ("cli_exact", "cli_stream"):
        try:
            module = __import__(f"cfsweep.{name}", fromlist=["register"])
        except ImportError:
            continue
        module.register(sub)
    return parser


def main(argv=None) -> int:
    try:
        args = build_parser().parse_args(argv)
        return args.func(args)
    except UsageError as exc:
        print(f"cfsweep: error: {exc}", file=sys.stderr)
        return 2
    except RunIntegrityError as exc:
        print(f"cfsweep: {exc}", file=sys.stderr)
        return 1
    except KeyboardInterrupt:
        print("cfsweep: interrupted; completed blocks are kept, rerun the same command to resume",
              file=sys.stderr)
        return 130


if __name__ == "__main__":
    sys.exit(main())
