"""Family grammar, membership and member counts against sympy."""
import pytest
from hypothesis import given, strategies as st

from cfsweep.errors import UsageError
from cfsweep.families import expected_members, parse_family
from reference import member

CLASSES = ["any", "squarefree", "prime"]
ALL_FAMILIES = [f"{b},num={n},den={d}" for b in ("all", "reduced") for n in CLASSES for d in CLASSES]


@pytest.mark.parametrize("text", ALL_FAMILIES)
@given(q_lo=st.integers(2, 400), span=st.integers(0, 40))
def test_expected_members_against_sympy(text, q_lo, span):
    fam = parse_family(text)
    q_hi = q_lo + span
    want = [sum(member(fam.base, fam.num, fam.den, p, q) for p in range(1, q)) for q in range(q_lo, q_hi + 1)]
    assert expected_members(fam, q_lo, q_hi) == want


@pytest.mark.parametrize("text", ALL_FAMILIES)
def test_membership_edges(text):
    fam = parse_family(text)
    for q in (2, 3, 4, 6, 12):
        for p in range(1, q):
            assert fam.contains(p, q) == member(fam.base, fam.num, fam.den, p, q)


def test_canonical_forms_and_shorthands():
    assert parse_family("all").canonical == "all"
    assert parse_family("Reduced").canonical == "reduced"
    assert parse_family("squarefree").canonical == "all,num=squarefree,den=squarefree"
    assert parse_family("prime,reduced").canonical == "reduced,num=prime,den=prime"
    assert parse_family("den=prime,num=squarefree").canonical == "all,num=squarefree,den=prime"
    assert parse_family(parse_family("reduced,den=squarefree").canonical) == parse_family("den=squarefree,reduced")
    # 2/6 is kept in the square-free family although it is not reduced
    assert parse_family("squarefree").contains(2, 6)


@pytest.mark.parametrize("bad", ["", "odd", "num=even", "den=", "squarefree,num=prime", "foo=any"])
def test_bad_family_text(bad):
    with pytest.raises(UsageError):
        parse_family(bad)
