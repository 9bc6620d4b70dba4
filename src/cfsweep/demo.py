"""The embedded demo: all fractions vs square-free numerator and denominator, q <= 10000.

Scenario (our own): a reader wants to see whether keeping only fractions whose numerator and denominator
are both square-free changes the digit statistics. The demo sweeps both families, prints their summaries
and tables against the Gauss measure, and writes two figures comparing them.
"""
from __future__ import annotations

import time
from pathlib import Path

from .plots import convergence_figure, digit_frequency_figure
from .report import render_summary, render_text, select_rows
from .runs import sweep
from .tables import analyse, write_run_tables
from .validate import parse_int

DEMO_MAX_DEN = 10000
DEMO_FAMILIES = ("all", "squarefree")


def run_demo(out: Path, max_den=None, quiet: bool = False) -> dict:
    """Run the demo into ``out`` (run directories ``out/<family>`` and PNG figures); return the paths."""
    out = Path(out)
    max_den = DEMO_MAX_DEN if max_den is None else parse_int(max_den, "--max-den")
    out.mkdir(parents=True, exist_ok=True)
    tables, curves, runs = {}, {}, {}
    for family in DEMO_FAMILIES:
        t0 = time.perf_counter()
        run = sweep(max_den, out / family.replace(",", "_").replace("=", "-"), family=family, words=3,
                    quiet=quiet)
        table, info, conv = analyse(run)
        write_run_tables(run.path, table, info, conv)
        name = run.params["family"]
        tables[name], curves[name], runs[name] = table, conv, run.path
        print(f"== family {name}: swept in {time.perf_counter() - t0:.1f} s into {run.path}")
        print(render_summary(info))
        print()
        print(render_text(select_rows(table, 5)))
        print()
    cap = 32
    digits_png = digit_frequency_figure(tables, cap, out / "digits.png",
                                        title=f"digit frequencies, q <= {max_den}, vs Gauss–Kuzmin (95% bars)")
    conv_png = convergence_figure(curves, cap, out / "convergence.png",
                                  title="digits 1-4 along the sweep (solid: all; dashed: square-free)")
    print(f"figures: {digits_png} and {conv_png}; run directories: {', '.join(str(p) for p in runs.values())}")
    return {"runs": runs, "digits_png": digits_png, "convergence_png": conv_png}
