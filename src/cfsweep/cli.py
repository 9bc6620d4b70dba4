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


def _add_goodness_options(p):
    p.add_argument("--good-eps", default=None,
                   help="count (eps, k)-good members for these tolerances 0 < eps < 1, e.g. 0.05,0.1,0.2")
    p.add_argument("--good-k", default="1", help="goodness uses words of length <= K (1..6; default 1)")
    p.add_argument("--good-min-len", default=None, help="good members have length >= L (default: good-k)")


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
    p.add_argument("--predicate", default=None,
                   help="module:function of a @numba.njit (p, q) -> bool that narrows the family "
                        "(the module is imported from the Python path or the current directory)")
    _add_goodness_options(p)
    p.add_argument("--cluster", default=None, help="run the blocks on Dask: tcp://HOST:PORT (a running "
                   "scheduler; the run directory must be shared with its workers) or local:N (N worker "
                   "processes here); see docs/cluster.md")
    p.add_argument("--shard", default=None, help="I/N: compute only the blocks with index = I (mod N), "
                   "0 <= I < N, for job arrays; the run is complete once all N shards have run")
    p.add_argument("--quiet", action="store_true", help="no progress bar")
    p.set_defaults(handler=_cmd_sweep)


def _cmd_sweep(args) -> int:
    from .runs import sweep

    t0 = time.perf_counter()
    run = sweep(args.max_den, args.out, min_den=args.min_den, family=args.family, cap=args.cap,
                words=args.words, blocks=args.blocks, threads=args.threads, quiet=args.quiet,
                good_eps=args.good_eps, good_k=args.good_k, good_min_len=args.good_min_len,
                predicate=args.predicate, cluster=args.cluster, shard=args.shard)
    return _report_run(run, time.perf_counter() - t0, args.shard)


def _report_run(run, seconds: float, shard) -> int:
    """One line on what the run directory holds now, and the next command."""
    records = [r for r in (run.store.read_record(b["id"]) for b in run.store.plan) if r is not None]
    members = sum(r["members"] for r in records)
    pqs = sum(r["partial_quotients"] for r in records)
    of = "" if len(records) == len(run.store.plan) else f" of {len(run.store.plan)}"
    where = f" (shard {shard})" if shard else ""
    unit = "samples" if run.store.manifest["kind"] == "sample" else "fractions"
    draws = (f", {sum(r.get('attempts', 0) for r in records):,} draws"
             if run.store.manifest["kind"] == "sample" else "")
    print(f"run {run.path}{where}: family {run.params['family']}, {len(records)}{of} blocks complete, "
          f"{members:,} {unit}, {pqs:,} partial quotients{draws} ({seconds:.1f} s for this call)")
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
    p.set_defaults(handler=_cmd_status)


def _cmd_status(args) -> int:
    import json

    from .status import render_status, run_status

    status = run_status(args.run, deep=not args.quick)
    print(json.dumps(status, indent=2, sort_keys=True) if args.json else render_status(status))
    return 0


def _add_sample(sub):
    p = sub.add_parser("sample", help="sample members uniformly with LO <= q < HI (q up to 2^63)",
                       description="Sampled run: members drawn uniformly from the family's pairs (p, q) "
                                   "with LO <= q < HI by a counter-based generator (Philox-4x64-10), so the "
                                   "run is the same for any number of blocks, threads or workers. Standard "
                                   "errors of a sampled run are genuine 95% confidence intervals.")
    p.add_argument("--den-range", default=None, help="LO:HI, 2 <= LO < HI <= 2^63, e.g. 1e12:2e12")
    p.add_argument("--scan", default=None, help="J0:J1: the ladder of ranges [10^j, 2*10^j), 1 <= J0 <= J1 <= 18")
    p.add_argument("--samples", required=True, help="samples per range (1 .. 10^12)")
    p.add_argument("--seed", required=True, help="seed of the generator (0 .. 2^64-1)")
    p.add_argument("--family", default="all", help=FAMILY_HELP)
    p.add_argument("--words", default="3", help="longest word length K counted (default 3)")
    p.add_argument("--cap", default="32", help="digits >= cap are pooled as 'cap+' (default 32)")
    p.add_argument("--block-samples", default=None, help="samples per block (default 2^20)")
    p.add_argument("--cluster", default=None, help="run the blocks on Dask: tcp://HOST:PORT or local:N")
    p.add_argument("--shard", default=None, help="I/N: only the blocks with index = I (mod N), 0 <= I < N")
    _add_goodness_options(p)
    p.add_argument("--threads", default=None, help="Numba threads (default: all cores)")
    p.add_argument("--out", required=True, help="run directory")
    p.add_argument("--quiet", action="store_true", help="no progress bar")
    p.set_defaults(handler=_cmd_sample)


def _cmd_sample(args) -> int:
    from .runs import sample

    t0 = time.perf_counter()
    run = sample(args.out, den_range=args.den_range, scan=args.scan, samples=args.samples, seed=args.seed,
                 family=args.family, cap=args.cap, words=args.words, block_samples=args.block_samples,
                 threads=args.threads, quiet=args.quiet, good_eps=args.good_eps, good_k=args.good_k,
                 good_min_len=args.good_min_len, cluster=args.cluster, shard=args.shard)
    return _report_run(run, time.perf_counter() - t0, args.shard)


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
    p.set_defaults(handler=_cmd_table)


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
    if run.store.manifest["kind"] == "sample" and len(run.params["den_ranges"]) > 1:
        from .sampled import range_frequencies

        ranges = range_frequencies(run.store)
        print()
        print("digit frequencies per sampled range (95% confidence intervals):")
        cols = ["q_lo", "q_hi", "samples", "word", "frequency", "std_error", "ci_low", "ci_high", "gauss_measure", "z"]
        print(render_markdown(ranges, cols) if args.markdown else render_text(ranges, cols))
    from .plots import convergence_figure, digit_frequency_figure

    cap = run.params["cap"]
    digit_frequency_figure({info["family"]: table}, cap, paths["frequency"].parent / "digits.png")
    convergence_figure({info["family"]: conv}, cap, paths["frequency"].parent / "convergence.png")
    if shown.num_rows < table.num_rows:
        print(f"({shown.num_rows} of {table.num_rows} rows shown; all rows in {paths['frequency']})")
    return 0


def _add_good(sub):
    p = sub.add_parser("good", help="proportion of good members G(q), Wilson bands, fitted rates",
                       description="For a run swept with --good-eps: G(q) per denominator and in log bins "
                                   "with 95%% Wilson intervals, fits of 1-G ~ C q^-alpha and 1-G ~ C (ln q)^-beta "
                                   "over the upper half of the bins (in log q), a central-limit heuristic for "
                                   "k = 1, a PNG and Parquet/CSV of the curve.")
    p.add_argument("run", help="run directory")
    p.add_argument("--per-decade", default="8", help="log bins per decade of q (1..100; default 8)")
    p.add_argument("--png", default=None, help="figure path (default RUN/tables/good.png)")
    p.add_argument("--csv", default=None, help="also write the binned curve as CSV to this file")
    p.set_defaults(handler=_cmd_good)


def _cmd_good(args) -> int:
    import pyarrow.compute as pc

    from .good import good_proportion
    from .plots import goodness_figure
    from .report import render_text
    from .runs import open_run
    from .store import TABLE_DIR, atomic_write_bytes, parquet_bytes
    from .validate import check_range, parse_int

    per_decade = check_range(parse_int(args.per_decade, "--per-decade"), "--per-decade", 1, 100)
    run = open_run(args.run)
    result = good_proportion(run, per_decade=per_decade)
    tables = run.path / TABLE_DIR
    meta = {"cfsweep.family": result.family, "cfsweep.good_k": str(result.good_k)}
    atomic_write_bytes(tables / "good_curve.parquet", parquet_bytes(result.curve, meta))
    atomic_write_bytes(tables / "good_bins.parquet", parquet_bytes(result.bins, meta))
    png = goodness_figure(result, Path(args.png) if args.png else tables / "good.png")
    if args.csv:
        from .report import write_csv
        write_csv(result.bins, args.csv)
    print(f"family {result.family}, (eps, k)-goodness with k <= {result.good_k}, length >= {result.good_min_len}")
    cols = ["q_lo", "q_hi", "eps", "members", "good", "proportion", "wilson_low", "wilson_high"]
    # the bins of the top two decades of q
    top = result.bins.filter(pc.greater_equal(result.bins["q_lo"], max(result.bins["q_lo"].to_pylist()) // 100))
    print(render_text(top, cols))
    for line in result.lines:
        print(line)
    print(f"figure {png}; curve {tables / 'good_curve.parquet'}, bins {tables / 'good_bins.parquet'}")
    return 0


def _add_demo(sub):
    p = sub.add_parser("demo", help="run the embedded demo scenario and write its figures")
    p.add_argument("--out", default="demo-output", help="folder for the demo runs and figures")
    p.add_argument("--max-den", default=None, help="override the demo's denominator bound")
    p.set_defaults(handler=_cmd_demo)


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
    _add_sample(sub)
    _add_table(sub)
    _add_good(sub)
    _add_status(sub)
    _add_demo(sub)
    for name in ("cli_exact", "cli_stream"):
        try:
            module = __import__(f"cfsweep.{name}", fromlist=["register"])
        except ImportError:
            continue
        module.register(sub).set_defaults(handler=module.run)
    return parser


def main(argv=None) -> int:
    try:
        args = build_parser().parse_args(argv)
        return args.handler(args)
    except UsageError as exc:
        print(f"cfsweep: error: {exc}", file=sys.stderr)
        return 2
    except RunIntegrityError as exc:
        print(f"cfsweep: {exc}", file=sys.stderr)
        return 1
    except BrokenPipeError:  # output piped into `head` and the like: stop quietly
        import os

        os.dup2(os.open(os.devnull, os.O_WRONLY), sys.stdout.fileno())
        return 0
    except KeyboardInterrupt:
        print("cfsweep: interrupted; completed blocks are kept, rerun the same command to resume",
              file=sys.stderr)
        return 130


if __name__ == "__main__":
    sys.exit(main())
