"""The ``exact`` subcommand: exact digit/word counts over all p/q with q <= max_den.

``register(subparsers)`` adds the subcommand to the main CLI; ``run(args)`` executes it and returns the
exit code. ``python -m cfsweep.cli_exact ...`` runs it standalone.
"""
from __future__ import annotations

import argparse
import os
import sys

from cfsweep.errors import UsageError


def _add_arguments(p: argparse.ArgumentParser) -> None:
    p.add_argument("--max-den", required=True, help="largest denominator Q (e.g. 1e7), 2..3e8")
    p.add_argument("--family", default="both", help="all | reduced | both (default both)")
    p.add_argument("--words", nargs="+", default=None, help="extra words, digits joined by commas: 1,2 2,1 1,1,1")
    p.add_argument("--all-words", default=None, help="every word of length <= K (only K = 1 is exact here)")
    p.add_argument("--cap", default="32", help="digits >= cap are pooled as 'cap+' (default 32)")
    p.add_argument("--checkpoints", default=None, help="comma-separated max_den values, e.g. 1e3,1e4,1e5")
    p.add_argument("--verify", action="store_true", help="check every number against enumeration")
    p.add_argument("--out", default=None, help="directory to write exact.parquet into")
    p.add_argument("--csv", default=None, help="write the frequency table as CSV to this file")
    p.add_argument("--markdown", action="store_true", help="print Markdown tables instead of plain text")
    p.add_argument("--threads", default=None, help="Numba threads")
    p.add_argument("--plot", default=None, help="PNG of the checkpoint curves (needs --checkpoints)")


def register(subparsers) -> argparse.ArgumentParser:
    """Add the ``exact`` subcommand to an argparse subparsers object; returns its parser."""
    p = subparsers.add_parser("exact", help="exact digit and word counts by lattice-point counting")
    _add_arguments(p)
    p.set_defaults(func=run)
    return p


def _parse_words(items, cap):
    from cfsweep.schema import parse_word_label

    if not items:
        return None
    words = []
    for item in items:
        for text in item.split():
            try:
                symbols, pooled = parse_word_label(text)
            except ValueError:
                raise UsageError(f"word {text!r}: expected digits >= 1 joined by commas, e.g. 1,2") from None
            if pooled and (len(symbols) != 1 or symbols[0] != cap):
                raise UsageError(f"word {text!r}: the pooled symbol is allowed only alone and as {cap}+ (--cap {cap})")
            words.append(symbols)
    return words


def _format_rows(header, rows, markdown):
    if markdown:
        lines = ["| " + " | ".join(header) + " |", "|" + "|".join("---" for _ in header) + "|"]
        lines += ["| " + " | ".join(r) + " |" for r in rows]
        return "\n".join(lines)
    widths = [max(len(h), *(len(r[i]) for r in rows)) if rows else len(h) for i, h in enumerate(header)]
    fmt = "  ".join(f"{{:>{w}}}" for w in widths)
    return "\n".join([fmt.format(*header)] + [fmt.format(*r) for r in rows])


def render(result, markdown: bool = False) -> str:
    """Plain (or Markdown) text: per family the totals, then per digit count, frequency, GK, ratio."""
    from cfsweep import gauss
    from cfsweep.exact import gauss_kuzmin_of

    out = []
    for name, fc in result.families.items():
        out.append(f"family {fc.family}, max_den {result.max_den}" + (" (verified by enumeration)" if result.verified else ""))
        out.append(f"  fractions        {fc.fractions}")
        out.append(f"  partial quotients {fc.total_length}")
        out.append(f"  mean length      {fc.mean_length:.12f}")
        header = ["word", "count", "frequency", "gauss measure", "ratio"]
        extra = any((name, r[0]) in result.extrapolations for r in result.symbol_rows())
        if extra:
            header += ["limit (fit)", "std err"]
        rows = []
        for label, symbols, k in result.symbol_rows():
            count = result.count(name, symbols)
            freq = count / fc.positions[k]
            mu = gauss_kuzmin_of(symbols, result.cap) if k == 1 else gauss.word_measure(symbols, result.cap)
            row = [label, str(count), f"{freq:.10f}", f"{mu:.10f}", f"{freq / mu:.6f}"]
            if extra:
                ex = result.extrapolations.get((name, label))
                row += ["" if ex is None else f"{ex.limit:.6f}",
                        "" if ex is None or ex.std_error is None else f"{ex.std_error:.1e}"]
            rows.append(row)
        out.append(_format_rows(header, rows, markdown))
        out.append("")
    return "\n".join(out)


def run(args) -> int:
    """Execute the ``exact`` subcommand; raises UsageError for bad input (the caller exits 2)."""
    from cfsweep.exact import MAX_EXACT_DEN, exact_counts, exact_table, parse_integer, write_exact_parquet

    max_den = parse_integer(args.max_den, "--max-den", 2, MAX_EXACT_DEN)
    if args.family not in ("all", "reduced", "both"):
        raise UsageError(f"--family {args.family!r}: allowed all, reduced, both")
    cap = parse_integer(args.cap, "--cap", 2, 1000)
    checkpoints = None
    if args.checkpoints:
        checkpoints = [parse_integer(t, "--checkpoints value", 2, MAX_EXACT_DEN)
                       for t in args.checkpoints.split(",") if t.strip()]
    if args.plot and (not checkpoints or len(checkpoints) < 2):
        raise UsageError("--plot needs --checkpoints with at least 2 values")
    if args.out and os.path.exists(args.out) and not os.path.isdir(args.out):
        raise UsageError(f"--out {args.out!r} exists and is not a directory")
    all_words = None if args.all_words is None else parse_integer(args.all_words, "--all-words", 1, 12)
    threads = None if args.threads is None else parse_integer(args.threads, "--threads", 1, 1024)
    result = exact_counts(max_den, family=args.family, words=_parse_words(args.words, cap), cap=cap,
                          all_words=all_words, checkpoints=checkpoints, threads=threads, verify=args.verify)
    print(render(result, markdown=args.markdown))
    if args.out:
        os.makedirs(args.out, exist_ok=True)
        write_exact_parquet(result, os.path.join(args.out, "exact.parquet"))
    if args.csv:
        import pyarrow.csv as pcsv

        pcsv.write_csv(exact_table(result), args.csv)
    if args.plot:
        from cfsweep.plots_exact import plot_checkpoints

        plot_checkpoints(result, args.plot)
    return 0


def main(argv=None) -> int:
    """Standalone entry: ``python -m cfsweep.cli_exact --max-den 1000``."""
    parser = argparse.ArgumentParser(prog="cfsweep-exact", description=__doc__.splitlines()[0])
    _add_arguments(parser)
    args = parser.parse_args(argv)
    try:
        return run(args)
    except UsageError as exc:
        print(f"error: {exc}", file=sys.stderr)
        return 2


if __name__ == "__main__":
    sys.exit(main())
