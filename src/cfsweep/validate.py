"""Checks of user parameters: each failure is a UsageError naming the value and the allowed range."""
from __future__ import annotations

import math
import re

from .errors import UsageError

#: Largest denominator of an exhaustive sweep (products of two denominators stay far inside int64).
MAX_SWEEP_DEN = 2**31 - 1
#: Largest word table the kernels allocate per thread (rows over all word lengths).
MAX_WORD_ROWS = 2**24
MAX_CAP = 1 << 16
MAX_WORD_LENGTH = 24

_INT_RE = re.compile(r"^[+-]?\d+$")
_SCI_RE = re.compile(r"^[+-]?(\d+(\.\d*)?|\.\d+)[eE][+]?\d+$")


def parse_int(text, name: str) -> int:
    """Parse an integer given as ``20000``, ``2e4`` or ``1_000``; refuse non-integral values."""
    if isinstance(text, bool):
        raise UsageError(f"{name} {text!r} is not an integer; allowed: whole numbers such as 20000 or 2e4")
    if isinstance(text, int):
        return text
    if isinstance(text, float):
        if math.isfinite(text) and text == int(text):
            return int(text)
        raise UsageError(f"{name} {text!r} is not an integer; allowed: whole numbers such as 20000 or 2e4")
    s = str(text).strip().replace("_", "")
    if _INT_RE.match(s):
        return int(s)
    if _SCI_RE.match(s):
        mantissa, _, exponent = s.lower().partition("e")
        from fractions import Fraction

        value = Fraction(mantissa) * 10 ** int(exponent)
        if value.denominator == 1:
            return int(value)
    raise UsageError(f"{name} {text!r} is not an integer; allowed: whole numbers such as 20000 or 2e4")


def check_range(value: int, name: str, lo: int, hi: int) -> int:
    if not (lo <= value <= hi):
        raise UsageError(f"{name} {value} is out of range; allowed: {lo} <= {name} <= {hi}")
    return value


def word_table_rows(cap: int, max_k: int) -> int:
    return sum(cap**k for k in range(1, max_k + 1))


def check_word_table(cap: int, max_k: int) -> None:
    rows = word_table_rows(cap, max_k)
    if rows > MAX_WORD_ROWS:
        raise UsageError(
            f"word table for --cap {cap} and --words {max_k} has {rows} rows; allowed: at most "
            f"{MAX_WORD_ROWS} (2^24): lower --words or --cap"
        )
