"""Progress of a run directory: which blocks are complete, missing or bad, how much work is done, and when
the rest might be done (``cfsweep status RUN``, :func:`run_status`).

Everything comes from the run directory alone (manifest and completion records), so the status of a run
written by a cluster or a job array can be read anywhere the directory is mounted, while it is running.

Definitions (units in brackets):

* fractions done: sum of the ``members`` of complete blocks; expected: sum of the plan's
  ``expected_members`` (exact, counted when the plan was made).
* partial quotients done: sum of the records' ``partial_quotients`` (exact). The expected total is an
  estimate: each block's share of :func:`cfsweep.plan.estimated_work` (the ``all`` family's work over its
  denominators) scaled by the block's expected members over its ``all`` members, and the whole estimate
  calibrated by the ratio actual / estimated over the complete blocks.
* kernel throughput [partial quotients per kernel-second]: done / sum of the records' ``kernel_seconds``
  (per block, whatever ran it: a rate of one worker, not of the cluster).
* session throughput [partial quotients per second of wall time]: over the latest session, i.e. the
  blocks since the last idle gap longer than ``SESSION_GAP_S`` (block start = finish - kernel seconds);
  rate = their partial quotients / (last finish - first start).
* eta [s]: estimated remaining partial quotients / session throughput (None without a session or
  when nothing remains to estimate from).
"""
from __future__ import annotations

import time
from pathlib import Path

from .plan import estimated_work
from .store import LOCK_FILE, RunStore, lock_holders

#: An idle gap between blocks longer than this [s] starts a new session (e.g. a resumed run).
SESSION_GAP_S = 300.0


def _all_members(q_lo: int, q_hi: int) -> int:
    """Fractions p/q, 1 <= p < q, with q_lo <= q <= q_hi: sum of (q - 1)."""
    return (q_hi * (q_hi - 1) - (q_lo - 1) * (q_lo - 2)) // 2


def block_work_estimate(block: dict) -> float | None:
    """Estimated partial quotients of a block of the plan (None for plans without denominator ranges)."""
    if "q_lo" not in block or "q_hi" not in block:
        return None
    q_lo, q_hi = block["q_lo"], block["q_hi"]
    work = estimated_work(q_lo, q_hi)
    all_members = _all_members(q_lo, q_hi)
    expected = block.get("expected_members")
    if expected is None or all_members == 0:
        return work
    return work * expected / all_members


def latest_session(records: list[dict], gap_s: float = SESSION_GAP_S) -> dict | None:
    """Blocks finished since the last idle gap longer than ``gap_s`` (see the module docstring)."""
    timed = sorted((r for r in records if "finished_unix" in r), key=lambda r: r["finished_unix"])
    if not timed:
        return None
    session = [timed[0]]
    last_finish = timed[0]["finished_unix"]
    for record in timed[1:]:
        start = record["finished_unix"] - record.get("kernel_seconds", 0.0)
        if start - last_finish > gap_s:
            session = []
        session.append(record)
        last_finish = max(last_finish, record["finished_unix"])
    started = min(r["finished_unix"] - r.get("kernel_seconds", 0.0) for r in session)
    finished = max(r["finished_unix"] for r in session)
    pqs = sum(r["partial_quotients"] for r in session)
    wall = finished - started
    return {
        "blocks": len(session),
        "partial_quotients": pqs,
        "started_unix": started,
        "last_finished_unix": finished,
        "wall_seconds": wall,
        "pq_per_second": pqs / wall if wall > 0 else None,
    }


def run_status(path, deep: bool = True) -> dict:
    """The status of the run directory ``path`` as a JSON-ready dict (see the module docstring).

    ``deep``: verify block files by sha256 (True) or by size only (False, faster on big runs).
    Keys: path, kind, tool_version, params, params_hash, blocks {total, complete, missing, bad},
    missing_blocks [ids], bad_blocks [{id, reason}], fractions {done, expected}, partial_quotients
    {done, expected_estimate}, fraction_done, pq_fraction_done_estimate, kernel_seconds,
    kernel_pq_per_second, session, eta_seconds, running [lock holders], complete (bool).
    """
    store = RunStore.open(Path(path))
    statuses = store.statuses(deep=deep)
    by_id = {b["id"]: b for b in store.plan}
    complete_ids = [s.block_id for s in statuses if s.state == "complete"]
    records = [store.read_record(bid) for bid in complete_ids]
    fractions_done = sum(r["members"] for r in records)
    fractions_expected = sum(b.get("expected_members", 0) for b in store.plan)
    pq_done = sum(r["partial_quotients"] for r in records)
    kernel_seconds = sum(r.get("kernel_seconds", 0.0) for r in records)

    estimates = {bid: block_work_estimate(b) for bid, b in by_id.items()}
    remaining_ids = [s.block_id for s in statuses if s.state != "complete"]
    pq_remaining = None
    if all(estimates[bid] is not None for bid in by_id):
        done_estimate = sum(estimates[bid] for bid in complete_ids)
        scale = pq_done / done_estimate if done_estimate > 0 and pq_done > 0 else 1.0
        pq_remaining = scale * sum(estimates[bid] for bid in remaining_ids)
    pq_expected = None if pq_remaining is None else pq_done + pq_remaining

    session = latest_session(records)
    eta = None
    if pq_remaining is not None and not remaining_ids:
        eta = 0.0
    elif pq_remaining is not None and session and session["pq_per_second"]:
        eta = pq_remaining / session["pq_per_second"]

    return {
        "path": str(store.path),
        "kind": store.manifest.get("kind"),
        "tool_version": store.manifest.get("tool_version"),
        "params": store.params,
        "params_hash": store.manifest.get("params_hash"),
        "blocks": {
            "total": len(statuses),
            "complete": len(complete_ids),
            "missing": sum(s.state == "missing" for s in statuses),
            "bad": sum(s.state == "bad" for s in statuses),
        },
        "missing_blocks": [s.block_id for s in statuses if s.state == "missing"],
        "bad_blocks": [{"id": s.block_id, "reason": s.reason} for s in statuses if s.state == "bad"],
        "fractions": {"done": fractions_done, "expected": fractions_expected},
        "partial_quotients": {"done": pq_done, "expected_estimate": pq_expected},
        "fraction_done": fractions_done / fractions_expected if fractions_expected else None,
        "pq_fraction_done_estimate": pq_done / pq_expected if pq_expected else None,
        "kernel_seconds": kernel_seconds,
        "kernel_pq_per_second": pq_done / kernel_seconds if kernel_seconds > 0 else None,
        "session": session,
        "eta_seconds": eta,
        "running": [{k: h[k] for k in ("pid", "host", "since", "lock") if k in h}
                    for h in lock_holders(store.path)],
        "complete": not remaining_ids,
        "checked_unix": time.time(),
    }


def _duration(seconds: float) -> str:
    seconds = int(round(seconds))
    days, rest = divmod(seconds, 86400)
    hours, rest = divmod(rest, 3600)
    minutes, secs = divmod(rest, 60)
    if days:
        return f"{days} d {hours} h"
    if hours:
        return f"{hours} h {minutes} min"
    if minutes:
        return f"{minutes} min {secs} s"
    return f"{secs} s"


def _list(items: list[str], n: int = 10) -> str:
    return ", ".join(items[:n]) + (f", ... (+{len(items) - n} more)" if len(items) > n else "")


def sweep_command(status: dict) -> str | None:
    """The ``cfsweep sweep`` command that resumes this run (sweep runs only)."""
    p = status["params"]
    if status["kind"] != "sweep":
        return None
    parts = ["cfsweep sweep", f"--max-den {p['max_den']}", f"--min-den {p['min_den']}",
             f"--family '{p['family']}'", f"--cap {p['cap']}", f"--words {p['words']}"]
    if p.get("blocks") is not None:
        parts.append(f"--blocks {p['blocks']}")
    parts.append(f"--out {status['path']}")
    return " ".join(parts)


def render_status(status: dict) -> str:
    """Terminal text of :func:`run_status`."""
    b = status["blocks"]
    lines = [f"run {status['path']} ({status['kind']}, cfsweep {status['tool_version']}, "
             f"parameters {str(status['params_hash'])[:12]})"]
    lines.append("parameters: " + " ".join(f"{k}={v}" for k, v in status["params"].items() if k != "kind"))
    lines.append(f"blocks: {b['complete']} complete, {b['missing']} missing, {b['bad']} bad, of {b['total']}")
    if status["missing_blocks"]:
        lines.append(f"  missing: {_list(status['missing_blocks'])}")
    for bad in status["bad_blocks"][:20]:
        lines.append(f"  bad: {bad['id']}: {bad['reason']}")
    if len(status["bad_blocks"]) > 20:
        lines.append(f"  ... and {len(status['bad_blocks']) - 20} more bad blocks")
    fr = status["fractions"]
    pct = f" ({100 * status['fraction_done']:.1f}%)" if status["fraction_done"] is not None else ""
    lines.append(f"fractions: {fr['done']:,} of {fr['expected']:,}{pct}")
    pq = status["partial_quotients"]
    if pq["expected_estimate"] is not None:
        lines.append(f"partial quotients: {pq['done']:,} of about {pq['expected_estimate']:,.0f} "
                     f"({100 * status['pq_fraction_done_estimate']:.1f}%, total estimated)")
    else:
        lines.append(f"partial quotients: {pq['done']:,}")
    if status["kernel_pq_per_second"]:
        text = f"throughput: {status['kernel_pq_per_second']:.3g} partial quotients per kernel-second"
        session = status["session"]
        if session and session["pq_per_second"]:
            text += (f"; {session['pq_per_second']:.3g} per second of wall time over the latest session "
                     f"({session['blocks']} blocks in {_duration(session['wall_seconds'])})")
        lines.append(text)
    if status["complete"]:
        lines.append("eta: done")
    elif status["eta_seconds"] is not None:
        lines.append(f"eta: {_duration(status['eta_seconds'])} at the latest session's rate")
    else:
        lines.append("eta: unknown (no completed blocks to measure a rate from)")
    for holder in status["running"]:
        what = "sweep" if holder["lock"] == LOCK_FILE else "shard " + holder["lock"][6:-5].replace("-of-", "/")
        lines.append(f"running: {what}, pid {holder.get('pid')} on {holder.get('host')} since {holder.get('since')}")
    if not status["complete"]:
        command = sweep_command(status)
        if command:
            lines.append(f"next: {command}  (computes the missing and bad blocks)")
    else:
        lines.append(f"next: cfsweep table {status['path']}")
    return "\n".join(lines)
