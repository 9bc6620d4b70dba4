"""Block plans: contiguous denominator ranges of roughly equal work, with deterministic ids.

The work of denominator q is about (#members with denominator q) x (mean length), i.e. roughly
(q - 1) * (HEILBRONN ln q + 0.5) partial quotients for the ``all`` family; families only rescale it.
The plan depends on (min_den, max_den, n_blocks) alone, so the same parameters always give the same
blocks; the number of threads or workers never changes it.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

from .gauss import HEILBRONN

#: Default target of partial quotients per block (about 0.1-0.3 s of kernel time on one core).
DEFAULT_BLOCK_PQ = 50_000_000
MAX_BLOCKS = 100_000


@dataclass(frozen=True)
class Block:
    """One unit of work: all family members p/q with q_lo <= q <= q_hi."""

    index: int
    q_lo: int
    q_hi: int

    @property
    def block_id(self) -> str:
        return f"{self.index:06d}"

    def to_json(self) -> dict:
        return {"id": self.block_id, "index": self.index, "q_lo": self.q_lo, "q_hi": self.q_hi}


def cumulative_work(q: float) -> float:
    """Approximate partial quotients of all p/q' with q' <= q (continuous antiderivative of the work)."""
    if q <= 1:
        return 0.0
    # integral of x * (a ln x + b) dx with a = HEILBRONN, b = 0.5
    a, b = HEILBRONN, 0.5
    return 0.5 * q * q * (a * math.log(q) - a / 2 + b)


def estimated_work(min_den: int, max_den: int) -> float:
    return cumulative_work(max_den + 0.5) - cumulative_work(min_den - 0.5)


def default_block_count(min_den: int, max_den: int) -> int:
    n_q = max_den - min_den + 1
    by_work = math.ceil(estimated_work(min_den, max_den) / DEFAULT_BLOCK_PQ)
    return max(1, min(n_q, MAX_BLOCKS, max(16, by_work)))


def make_plan(min_den: int, max_den: int, n_blocks: int | None = None) -> list[Block]:
    """Split [min_den, max_den] into ``n_blocks`` contiguous ranges of about equal estimated work.

    Every denominator belongs to exactly one block; blocks are never empty (n_blocks is reduced to the
    number of denominators if needed).
    """
    n_q = max_den - min_den + 1
    if n_blocks is None:
        n_blocks = default_block_count(min_den, max_den)
    n_blocks = max(1, min(n_blocks, n_q))
    lo_work = cumulative_work(min_den - 0.5)
    total = cumulative_work(max_den + 0.5) - lo_work
    bounds = [min_den - 1]
    for i in range(1, n_blocks):
        target = lo_work + total * i / n_blocks
        lo, hi = bounds[-1] + 1, max_den - (n_blocks - i)
        # Smallest q with cumulative_work(q + 0.5) >= target, kept so every block has >= 1 denominator.
        while lo < hi:
            mid = (lo + hi) // 2
            if cumulative_work(mid + 0.5) >= target:
                hi = mid
            else:
                lo = mid + 1
        bounds.append(lo)
    bounds.append(max_den)
    return [Block(i, bounds[i] + 1, bounds[i + 1]) for i in range(n_blocks)]
