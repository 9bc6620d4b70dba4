"""Turn kernel outputs into the plain dictionaries of tests/reference.py."""
from collections import Counter

import numpy as np

from cfsweep.blocks import decode_rows


def kernel_to_dicts(out, cap, max_k, q_lo):
    word_sums, position_sums, length_hist, per_den = out
    rows = np.nonzero(word_sums[:, 0])[0]
    _, symbols = decode_rows(rows, cap, max_k)
    words = {w: [int(x) for x in word_sums[r]] for w, r in zip(symbols, rows)}
    positions = {k: [int(position_sums[k, 0]), int(position_sums[k, 1])] for k in range(1, max_k + 1)}
    lengths = Counter({int(n): int(v) for n, v in enumerate(length_hist) if v})
    per = {q_lo + i: tuple(int(x) for x in row) for i, row in enumerate(per_den)}
    return {"words": words, "positions": positions, "lengths": lengths, "per_den": per}
