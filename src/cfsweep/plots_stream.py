"""PNG figure of the prefix discrepancy of a stream (matplotlib, Agg backend)."""
from __future__ import annotations

import os
from pathlib import Path

import pyarrow as pa

from .errors import UsageError


def plot_discrepancy(table: pa.Table, path, family: str = "") -> Path:
    """Log-log plot of the discrepancy against prefix length, one line per word length k.

    ``table`` is the per (prefix length, k) table of :func:`cfsweep.stream.prefix_discrepancy`; points
    whose sup is only bounded (``exact`` false) are drawn hollow. Written to a temporary name, then
    renamed to ``path``. Returns the path.
    """
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    out = Path(path)
    if out.is_dir():
        raise UsageError(f"discrepancy-png path {str(out)!r} is a directory; allowed: a file path")
    if not out.parent.is_dir():
        raise UsageError(f"discrepancy-png path {str(out)!r}: directory {str(out.parent)!r} does not exist")
    rows = table.to_pylist()
    if not rows:
        raise UsageError("discrepancy table is empty: nothing to plot")
    fig, ax = plt.subplots(figsize=(7, 4.5), dpi=110)
    for k in sorted({r["k"] for r in rows}):
        pts = [r for r in rows if r["k"] == k]
        xs = [r["prefix_length"] for r in pts]
        ys = [r["discrepancy"] for r in pts]
        (line,) = ax.plot(xs, ys, "-", label=f"words of length {k}")
        ax.plot([x for x, r in zip(xs, pts) if r["exact"]], [y for y, r in zip(ys, pts) if r["exact"]],
                "o", color=line.get_color())
        ax.plot([x for x, r in zip(xs, pts) if not r["exact"]],
                [y for y, r in zip(ys, pts) if not r["exact"]], "o", mfc="none", color=line.get_color())
    ax.set_xscale("log")
    ax.set_yscale("log")
    ax.set_xlabel("prefix length n (partial quotients)")
    ax.set_ylabel("sup over words |frequency - Gauss measure|")
    ax.set_title(f"Prefix discrepancy of the stream{f' ({family})' if family else ''}")
    ax.grid(True, which="both", alpha=0.3)
    ax.legend()
    fig.tight_layout()
    tmp = out.with_name(f".{out.name}.{os.getpid()}.tmp.png")
    try:
        fig.savefig(tmp, format="png")
        os.replace(tmp, out)
    finally:
        plt.close(fig)
        if tmp.exists():
            tmp.unlink()
    return out
