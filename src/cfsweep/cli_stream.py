"""Command line face of :mod:`cfsweep.stream`: the ``stream`` subcommand (and a standalone main)."""
from __future__ import annotations

import argparse
import sys
from decimal import Decimal, InvalidOperation

from .errors import UsageError
from .families import parse_family
from .stream import (DEFAULT_CHUNK_SIZE, MAX_CHUNK_SIZE, MAX_DECIMALS, MAX_WORD_LENGTH, analyse_stream,
                     decimal_expansion, summarize_discrepancy)

DEFAULT_TERMS = 10 ** 6


def parse_count(text: str, name: str = "terms") -> int:
    """An exact integer from '1000000', '1_000_000' or '1e6'; UsageError when not a whole number."""
    try:
        return int(text)
    except (TypeError, ValueError):
        pass
    try:
        value = Decimal(str(text).replace("_", ""))
    except InvalidOperation:
        raise UsageError(f"{name} {text!r} is not a whole number (e.g. 1000000 or 1e6)") from None
    if not value.is_finite() or value != value.to_integral_value():
        raise UsageError(f"{name} {text!r} is not a whole number (e.g. 1000000 or 1e6)")
    return int(value)


def register(subparsers) -> argparse.ArgumentParser:
    """Add the ``stream`` subcommand to an argparse subparsers object."""
    p = subparsers.add_parser(
        "stream", help="the constructed number: partial quotient stream, prefix discrepancy, decimals",
        description="Concatenate the expansions of the family's members p/q (order of q, then p).")
    p.add_argument("--family", default="all", help="family of fractions (default: all)")
    p.add_argument("--terms", default=str(DEFAULT_TERMS),
                   help=f"number of partial quotients N >= 1; 1e6 notation allowed (default {DEFAULT_TERMS})")
    p.add_argument("--out", default=None, help="write the stream to this Parquet file")
    p.add_argument("--chunk-size", default=str(DEFAULT_CHUNK_SIZE),
                   help=f"terms per chunk and row group, 1..{MAX_CHUNK_SIZE} (default {DEFAULT_CHUNK_SIZE})")
    p.add_argument("--words", default="2",
                   help=f"discrepancy over words of length <= K, 1..{MAX_WORD_LENGTH} (default 2)")
    p.add_argument("--discrepancy-png", default=None, help="write a PNG of the prefix discrepancy")
    p.add_argument("--decimals", default=None, help=f"also print the first M certain decimals, 1..{MAX_DECIMALS}")
    p.add_argument("--quiet", action="store_true", help="print only the results, no progress notes")
    p.set_defaults(run=run)
    return p


def _format_table(summary) -> str:
    rows = summarize_discrepancy(summary.discrepancy).to_pylist()
    head = f"{'prefix n':>14}  {'discrepancy':>12}  {'word':<12} {'frequency':>10}  {'gauss mu':>10}  exact"
    lines = [head]
    for r in rows:
        lines.append(f"{r['prefix_length']:>14}  {r['discrepancy']:>12.6g}  {r['word']:<12} "
                     f"{r['frequency']:>10.6g}  {r['gauss_measure']:>10.6g}  {'yes' if r['exact'] else 'bounded'}")
    return "\n".join(lines)


def run(args) -> int:
    """Run the ``stream`` subcommand; UsageError propagates (the caller prints it, exit 2)."""
    family = parse_family(args.family)
    terms = parse_count(args.terms, "terms")
    if terms < 1:
        raise UsageError(f"terms {terms} out of range: allowed terms >= 1")
    chunk_size = parse_count(args.chunk_size, "chunk-size")
    words = parse_count(args.words, "words")
    if not 1 <= words <= MAX_WORD_LENGTH:
        raise UsageError(f"words {words} out of range: allowed 1 <= words <= {MAX_WORD_LENGTH}")
    digits = None
    if args.decimals is not None:
        digits = parse_count(args.decimals, "decimals")
        if not 1 <= digits <= MAX_DECIMALS:
            raise UsageError(f"decimals {digits} out of range: allowed 1 <= decimals <= {MAX_DECIMALS}")
    if args.discrepancy_png is not None:
        from pathlib import Path

        png = Path(args.discrepancy_png)
        if png.is_dir() or not png.parent.is_dir():
            raise UsageError(f"discrepancy-png path {str(png)!r} is a directory or its directory does not "
                             "exist; allowed: a file path in an existing directory")
    summary = analyse_stream(family, terms, out=args.out, chunk_size=chunk_size, max_word_length=words)
    print(f"family {summary.family}: {summary.terms} partial quotients; the prefix ends in "
          f"{summary.end_p}/{summary.end_q} (denominator {summary.end_q}, numerator {summary.end_p}), "
          f"after {summary.end_digits} of its {summary.end_length} partial quotients")
    if summary.path and not args.quiet:
        print(f"wrote {summary.path}")
    print(f"prefix discrepancy, words of length <= {words} (sup over all words, absent ones included):")
    print(_format_table(summary))
    if args.discrepancy_png is not None:
        from .plots_stream import plot_discrepancy

        plot_discrepancy(summary.discrepancy, args.discrepancy_png, summary.family)
        if not args.quiet:
            print(f"wrote {args.discrepancy_png}")
    if digits is not None:
        expansion = decimal_expansion(family, digits)
        if not args.quiet:
            print(f"decimals: {digits} certain digits from {expansion.terms} partial quotients")
        print(f"x = 0.{expansion.digits}")
    return 0


def main(argv=None) -> int:
    """Standalone entry: ``python -m cfsweep.cli_stream [stream options]``."""
    parser = argparse.ArgumentParser(prog="cfsweep-stream")
    sub = parser.add_subparsers(dest="command")
    register(sub)
    argv = list(sys.argv[1:] if argv is None else argv)
    if not argv or argv[0] != "stream":
        argv = ["stream"] + argv
    args = parser.parse_args(argv)
    try:
        return args.run(args)
    except UsageError as exc:
        print(f"cfsweep stream: error: {exc}", file=sys.stderr)
        return 2


if __name__ == "__main__":
    sys.exit(main())
