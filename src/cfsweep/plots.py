"""PNG figures of runs (matplotlib with the Agg backend: no display needed)."""
from __future__ import annotations

from pathlib import Path

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402
import pyarrow as pa  # noqa: E402

from .gauss import word_measure  # noqa: E402


def digit_frequency_figure(tables: dict[str, pa.Table], cap: int, path: Path, title: str = "") -> Path:
    """Digit frequencies (one marker series per family) with 95% error bars vs Gauss–Kuzmin, log scale."""
    fig, (ax, axr) = plt.subplots(2, 1, figsize=(8, 6.5), sharex=True, gridspec_kw={"height_ratios": [3, 2]})
    symbols = np.arange(1, cap + 1)
    mu = np.array([word_measure((int(s),), cap) for s in symbols])
    ax.plot(symbols[:-1], mu[:-1], "k-", lw=1, label="Gauss–Kuzmin log2(1+1/(a(a+2)))")
    ax.plot(symbols[-1:], mu[-1:], "k_", ms=14, mew=2, label=f"Gauss measure of {cap}+: log2(1+1/{cap})")
    for offset, (name, table) in enumerate(tables.items()):
        d = table.filter(pa.compute.equal(table["k"], 1)).to_pydict()
        xs = np.array([cap if w.endswith("+") else int(w) for w in d["word"]], float)
        f = np.array(d["frequency"])
        se = np.array([0.0 if s is None else s for s in d["std_error"]])
        shift = (offset - (len(tables) - 1) / 2) * 0.15
        ax.errorbar(xs + shift, f, yerr=1.96 * se, fmt="o", ms=3, capsize=2, label=name)
        mus = np.array([mu[int(x) - 1] for x in xs])
        axr.errorbar(xs + shift, f / mus, yerr=1.96 * se / mus, fmt="o", ms=3, capsize=2, label=name)
    ax.set_yscale("log")
    ax.set_ylabel("frequency")
    ax.legend(fontsize=8)
    ax.set_title(title or "digit frequencies vs the Gauss–Kuzmin law")
    axr.axhline(1.0, color="k", lw=1)
    axr.set_ylabel("frequency / Gauss–Kuzmin")
    axr.set_xlabel(f"partial quotient (last point: pooled {cap}+)")
    fig.tight_layout()
    fig.savefig(path, dpi=120)
    plt.close(fig)
    return Path(path)


def convergence_figure(curves: dict[str, pa.Table], cap: int, path: Path, title: str = "") -> Path:
    """Cumulative frequency of the digits 1..4 as the denominator bound Q grows, against Gauss–Kuzmin."""
    fig, ax = plt.subplots(figsize=(8, 5))
    styles = ["-", "--", ":", "-."]
    colors = ["C0", "C1", "C2", "C3"]
    for d in range(1, 5):
        if d >= cap:
            break
        ax.axhline(word_measure((d,), cap), color=colors[d - 1], lw=0.8, alpha=0.6)
    for j, (name, conv) in enumerate(curves.items()):
        for d in range(1, 5):
            col = f"freq_digit_{d}"
            if col not in conv.column_names or conv[col].null_count:
                continue
            ax.plot(conv["q"], conv[col], styles[j % 4], color=colors[d - 1],
                    label=f"digit {d}, {name}")
    ax.set_xscale("log")
    ax.set_xlabel("denominator bound Q")
    ax.set_ylabel("frequency over all members with q <= Q")
    ax.set_title(title or "digit frequencies along the sweep (thin lines: Gauss–Kuzmin)")
    ax.legend(fontsize=7, ncol=2)
    fig.tight_layout()
    fig.savefig(path, dpi=120)
    plt.close(fig)
    return Path(path)


def goodness_figure(result, path: Path) -> Path:
    """G(q) per log bin with Wilson bands, the fitted curves, and the heuristic, one colour per eps."""
    fig, (ax, axb) = plt.subplots(2, 1, figsize=(8, 7), sharex=True)
    bins = result.bins
    for j, eps in enumerate(sorted(result.fits)):
        sel = bins.filter(pa.compute.equal(bins["eps"], eps)).to_pydict()
        centres = np.sqrt(np.array(sel["q_lo"], float) * np.array(sel["q_hi"], float))
        prop = np.array(sel["proportion"])
        lo, hi = np.array(sel["wilson_low"]), np.array(sel["wilson_high"])
        color = f"C{j}"
        ax.plot(centres, prop, "o-", color=color, ms=3, label=f"eps = {eps:g}")
        ax.fill_between(centres, lo, hi, color=color, alpha=0.25)
        axb.plot(centres, 1 - prop, "o", color=color, ms=3)
        axb.fill_between(centres, np.clip(1 - hi, 1e-12, None), np.clip(1 - lo, 1e-12, None), color=color, alpha=0.2)
        for name, style in (("power", "-"), ("log", "--")):
            f = result.fits[eps][name]
            if f is not None:
                qq = centres[centres >= f.q_from]
                axb.plot(qq, f.predict(qq), style, color=color, lw=1,
                         label=f"eps {eps:g}: {'C q^-a' if name == 'power' else 'C (ln q)^-b'}, rate {f.rate:.2f}")
        if result.heuristic.get(eps):
            axb.plot(centres, result.heuristic[eps], ":", color=color, lw=1.5,
                     label=f"eps {eps:g}: heuristic (CLT), not a fit")
    ax.set_xscale("log")
    ax.set_ylabel("G(q): proportion of good members")
    ax.set_title(f"(eps, {result.good_k})-good members of {result.family} (95% Wilson bands)")
    ax.legend(fontsize=8)
    axb.set_xscale("log")
    axb.set_yscale("log")
    axb.set_ylabel("1 - G(q)")
    axb.set_xlabel("denominator q (log bins)")
    # no fit and no heuristic (too few bins, as in a run of one range) leaves nothing to name
    if axb.get_legend_handles_labels()[1]:
        axb.legend(fontsize=6)
    fig.tight_layout()
    fig.savefig(path, dpi=120)
    plt.close(fig)
    return Path(path)
