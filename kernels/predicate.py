"""Family members chosen by a user predicate: a Numba-jitted function (p, q) -> bool.

Kernels that take a function argument are compiled per predicate and never cached (kernels/_jit.py).
"""
import numba
import numpy as np

from ._jit import UNCACHED


@numba.njit(**UNCACHED)
def member_numerators(q, num_ok, den_ok, coprime_only, predicate, out):
    """Write the numerators p (1 <= p < q) of the members with denominator q into ``out``; return count.

    A member satisfies the class arrays (empty = any), coprimality if asked, and ``predicate(p, q)``.
    """
    if den_ok.shape[0] > 0 and den_ok[q] == 0:
        return 0
    has_num = num_ok.shape[0] > 0
    count = 0
    for p in range(1, q):
        if has_num and num_ok[p] == 0:
            continue
        if coprime_only:
            a, b = q, p
            while b != 0:
                a, b = b, a % b
            if a != 1:
                continue
        if predicate(np.int64(p), np.int64(q)):
            out[count] = p
            count += 1
    return count


@numba.njit(**UNCACHED)
def count_members(q_lo, q_hi, num_ok, den_ok, coprime_only, predicate):
    """Members per denominator q_lo..q_hi under the predicate (counting only: nothing is expanded)."""
    out = np.zeros(q_hi - q_lo + 1, np.int64)
    scratch = np.empty(q_hi + 1, np.int64)
    for q in range(q_lo, q_hi + 1):
        out[q - q_lo] = member_numerators(q, num_ok, den_ok, coprime_only, predicate, scratch)
    return out
