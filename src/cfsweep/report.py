"""Terminal, CSV and Markdown renderings of frequency tables and run summaries."""
from __future__ import annotations

import math

import pyarrow as pa
import pyarrow.csv as pacsv

COLUMNS = ["word", "k", "count", "positions", "frequency", "gauss_measure", "ratio", "std_error",
           "ci_low", "ci_high", "z"]


def _fmt(value, column: str) -> str:
    if value is None:
        return "-"
    if isinstance(value, float) and column == "eps":
        return f"{value:g}"
    if isinstance(value, float):
        if math.isnan(value):
            return "nan"
        if column in ("ratio", "z"):
            return f"{value:.4f}" if column == "ratio" else f"{value:.2f}"
        return f"{value:.6g}" if column == "std_error" else f"{value:.6f}"
    return str(value)


def select_rows(table: pa.Table, top_words: int | None) -> pa.Table:
    """All single digits, and for each k >= 2 the ``top_words`` most frequent words (None: all rows)."""
    if top_words is None:
        return table
    keep = []
    ks = table["k"].to_pylist()
    counts = table["count"].to_pylist()
    by_k: dict[int, list[int]] = {}
    for i, k in enumerate(ks):
        by_k.setdefault(k, []).append(i)
    for k in sorted(by_k):
        idx = by_k[k]
        if k == 1:
            keep.extend(idx)
        else:
            keep.extend(sorted(sorted(idx, key=lambda i: -counts[i])[:top_words]))
    return table.take(keep)


def render_text(table: pa.Table, columns=COLUMNS) -> str:
    """A plain aligned text table."""
    data = table.select(columns).to_pydict()
    cells = [[_fmt(v, c) for v in data[c]] for c in columns]
    widths = [max(len(c), *(len(x) for x in col)) if col else len(c) for c, col in zip(columns, cells)]
    lines = ["  ".join(c.rjust(w) for c, w in zip(columns, widths))]
    for i in range(table.num_rows):
        lines.append("  ".join(cells[j][i].rjust(widths[j]) for j in range(len(columns))))
    return "\n".join(lines)


def render_markdown(table: pa.Table, columns=COLUMNS) -> str:
    data = table.select(columns).to_pydict()
    lines = ["| " + " | ".join(columns) + " |", "|" + "|".join("---:" for _ in columns) + "|"]
    for i in range(table.num_rows):
        lines.append("| " + " | ".join(_fmt(data[c][i], c) for c in columns) + " |")
    return "\n".join(lines)


def write_csv(table: pa.Table, path) -> None:
    pacsv.write_csv(table, str(path))


def render_summary(summary: dict) -> str:
    """Human-readable summary block of a run."""
    hist = summary["length_histogram"]
    hist_text = " ".join(f"{k}:{v}" for k, v in sorted(hist.items()))
    rows = [
        ("method", summary["method"]),
        ("family", summary["family"]),
        ("denominators", f"{summary['min_den']} <= q <= {summary['max_den']}" if summary.get("den_ranges") is None
         else "; ".join(f"{lo} <= q < {hi}" for lo, hi in summary["den_ranges"][:4])
         + (f"; ... ({len(summary['den_ranges'])} ranges)" if len(summary["den_ranges"]) > 4 else "")
         + f" (sampled, seed {summary['seed']})"),
        ("cap / word length", f"{summary['cap']} / {summary['words']}"),
        ("fractions", f"{summary['fractions']:,}"),
        ("partial quotients", f"{summary['partial_quotients']:,}"),
        ("mean length", f"{summary['mean_length']:.6f}"),
        ("TV distance digits vs Gauss-Kuzmin", f"{summary['tv_distance_digits']:.6f}"),
        ("length histogram (length:fractions)", hist_text),
    ]
    width = max(len(k) for k, _ in rows)
    return "\n".join(f"{k.ljust(width)}  {v}" for k, v in rows)
