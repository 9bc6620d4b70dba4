"""Layered chain: Fraction and sympy expansions == Numba serial kernel == parallel kernel == pipeline."""
import numpy as np
import pytest
from hypothesis import given, settings, strategies as st

from cfsweep import frequency_table, sweep
from cfsweep.families import parse_family
from cfsweep.kernels.euclid import MAX_LENGTH, expand
from cfsweep.kernels.sweep import sweep_block, sweep_block_serial
from cfsweep.schema import parse_word_label
from kernel_views import kernel_to_dicts
from reference import cf_fraction, cf_sympy, reference_sweep


@given(st.integers(2, 10**12).flatmap(lambda q: st.tuples(st.integers(1, q - 1), st.just(q))))
def test_expand_matches_fraction_and_sympy(pq):
    p, q = pq
    out = np.empty(MAX_LENGTH, np.int64)
    n, g = expand(p, q, out)
    ref = cf_fraction(p, q)
    assert list(out[:n]) == ref == cf_sympy(p, q)
    assert ref[-1] >= 2 or (len(ref) == 1 and ref[0] >= 2)
    import math
    assert g == math.gcd(p, q)


FAMILIES = ["all", "reduced", "squarefree", "prime", "reduced,den=squarefree", "num=squarefree,den=prime"]


def _membership(fam, q_hi):
    return parse_family(fam).membership(q_hi)


@pytest.mark.parametrize("family", FAMILIES)
@given(q_lo=st.integers(2, 60), span=st.integers(0, 50), cap=st.integers(2, 12), max_k=st.integers(1, 4))
def test_serial_kernel_matches_plain_python(family, q_lo, span, cap, max_k):
    q_hi = q_lo + span
    f = parse_family(family)
    num_ok, den_ok, cop = f.membership(q_hi)
    ref = reference_sweep(q_lo, q_hi, f.base, f.num, f.den, cap, max_k)
    got = kernel_to_dicts(sweep_block_serial(q_lo, q_hi, num_ok, den_ok, cop, cap, max_k), cap, max_k, q_lo)
    assert got == ref


@given(q_lo=st.integers(2, 300), span=st.integers(0, 200), cap=st.integers(2, 40), max_k=st.integers(1, 3),
       chunks=st.integers(1, 7), family=st.sampled_from(FAMILIES))
def test_parallel_kernel_matches_serial(q_lo, span, cap, max_k, chunks, family):
    q_hi = q_lo + span
    num_ok, den_ok, cop = _membership(family, q_hi)
    a = sweep_block_serial(q_lo, q_hi, num_ok, den_ok, cop, cap, max_k)
    b = sweep_block(q_lo, q_hi, num_ok, den_ok, cop, cap, max_k, chunks)
    for x, y in zip(a, b):
        np.testing.assert_array_equal(x, y)


@settings(max_examples=12)
@given(family=st.sampled_from(["all", "reduced", "squarefree", "num=prime,den=squarefree"]),
       q_max=st.integers(2, 90), cap=st.integers(2, 9), max_k=st.integers(1, 3), blocks=st.integers(1, 7))
def test_pipeline_matches_plain_python(tmp_path_factory, family, q_max, cap, max_k, blocks):
    tmp_path = tmp_path_factory.mktemp("pipeline")
    run = sweep(q_max, tmp_path / "run", family=family, cap=cap, words=max_k, blocks=blocks)
    table = frequency_table(run).to_pydict()
    f = parse_family(family)
    ref = reference_sweep(2, q_max, f.base, f.num, f.den, cap, max_k)
    got = {parse_word_label(w)[0]: (c, m) for w, c, m in zip(table["word"], table["count"], table["positions"])}
    want = {w: (v[0], ref["positions"][len(w)][0]) for w, v in ref["words"].items()}
    assert got == want
