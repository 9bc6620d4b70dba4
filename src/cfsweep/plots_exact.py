"""PNG of exact digit frequencies along the checkpoints, relative to the Gauss measure."""
from __future__ import annotations

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402

from cfsweep import gauss  # noqa: E402


def plot_checkpoints(result, path, max_digit: int = 5) -> None:
    """Plot frequency / Gauss measure against max_den (log scale) for digits 1..max_digit and the bucket.

    One panel per family; the extrapolated limit (when available) is drawn as a marker at the right.
    Raises ValueError when the result has fewer than 2 checkpoints.
    """
    points = result.checkpoints
    if len(points) < 2:
        raise ValueError("plot needs at least 2 checkpoints")
    qs = [p.max_den for p in points]
    rows = [r for r in result.symbol_rows() if r[2] == 1 and (r[1][0] <= max_digit or r[1][0] >= result.cap)]
    fams = list(result.families)
    fig, axes = plt.subplots(1, len(fams), figsize=(6 * len(fams), 4.5), squeeze=False)
    for ax, name in zip(axes[0], fams):
        for label, symbols, _k in rows:
            mu = gauss.word_measure(symbols, result.cap)
            ys = [p.count(name, symbols) / p.families[name].positions[1] / mu for p in points]
            (line,) = ax.plot(qs, ys, marker="o", label=label)
            ex = result.extrapolations.get((name, label))
            if ex is not None:
                ax.plot([qs[-1] * 3], [ex.limit / mu], marker="*", color=line.get_color(), markersize=10)
        ax.axhline(1.0, color="black", linewidth=0.8)
        ax.set_xscale("log")
        ax.set_xlabel("max denominator Q")
        ax.set_ylabel("exact frequency / Gauss measure")
        ax.set_title(f"family {name} (star: fit f_inf + a/ln Q + b/ln² Q)")
        ax.legend(fontsize=8)
    fig.tight_layout()
    fig.savefig(path, dpi=110)
    plt.close(fig)
