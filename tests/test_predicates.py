"""User predicates: equality with built-in families, manifest identity, clear refusals."""
import textwrap

import numba
import pytest

from cfsweep import frequency_table, sweep
from cfsweep.cli import main
from cfsweep.errors import UsageError
from cfsweep.reduce import merge_run


@numba.njit
def squarefree_pair(p, q):
    d = 2
    while d * d <= q:
        if p % (d * d) == 0 or q % (d * d) == 0:
            return False
        d += 1
    return True


@numba.njit
def coprime(p, q):
    a, b = q, p
    while b:
        a, b = b, a % b
    return a == 1


def _integers(run):
    m = merge_run(run.store)
    return (frequency_table(run).select(["word", "count", "positions"]).to_pylist(), m.lengths.to_pylist(),
            m.denominators.to_pylist(), None if m.goodness is None else m.goodness.to_pylist())


@pytest.mark.parametrize("predicate,family", [(squarefree_pair, "squarefree"), (coprime, "reduced")])
def test_predicate_reproduces_builtin_family(tmp_path, predicate, family):
    a = sweep(150, tmp_path / "pred", predicate=predicate, cap=8, words=3, good_eps="0.2", blocks=3)
    b = sweep(150, tmp_path / "builtin", family=family, cap=8, words=3, good_eps="0.2", blocks=5)
    assert _integers(a) == _integers(b)
    ident = a.params["predicate"]
    assert ident["name"].endswith(":" + predicate.py_func.__qualname__) and len(ident["source_sha256"]) == 64
    assert a.params["family"] == f"all,pred={ident['name']}"


def _plain(p, q):
    return True


@numba.njit
def _raises(p, q):
    return 1 // (p - p) > 0


@numba.njit
def _three_args(p, q, r):
    return True


@numba.njit
def _returns_int(p, q):
    return p + q


@pytest.mark.parametrize("bad,needle", [(_plain, "not a Numba-jitted function"), (_raises, "raised"),
                                        (_three_args, "does not compile"), (_returns_int, "allowed: bool")])
def test_bad_predicates_fail_before_any_block(tmp_path, bad, needle):
    with pytest.raises(UsageError, match=needle):
        sweep(50, tmp_path / "r", predicate=bad)
    assert not (tmp_path / "r").exists()


def test_cli_predicate_module_function(tmp_path, monkeypatch, capsys):
    (tmp_path / "userpreds.py").write_text(textwrap.dedent("""
        import numba

        @numba.njit
        def odd_denominator(p, q):
            return q % 2 == 1
    """))
    monkeypatch.chdir(tmp_path)
    assert main(["sweep", "--max-den", "60", "--predicate", "userpreds:odd_denominator", "--out", "r",
                 "--quiet"]) == 0
    m = merge_run(tmp_path / "r")
    den = m.denominators.to_pydict()
    assert all((members > 0) == (q % 2 == 1) for q, members in zip(den["q"], den["members"]))
    assert sum(den["members"]) == sum(q - 1 for q in range(3, 61, 2))
    for spec, needle in (("nomodule_xyz:f", "cannot be imported"), ("userpreds:missing", "has no"),
                         ("userpreds", "not module:function")):
        assert main(["sweep", "--max-den", "60", "--predicate", spec, "--out", "r2"]) == 2
        assert needle in capsys.readouterr().err
    assert not (tmp_path / "r2").exists()


def test_changed_predicate_cannot_resume(tmp_path, monkeypatch, capsys):
    src = tmp_path / "chpred.py"
    src.write_text("import numba\n\n@numba.njit\ndef f(p, q):\n    return q % 3 != 0\n")
    monkeypatch.chdir(tmp_path)
    assert main(["sweep", "--max-den", "40", "--predicate", "chpred:f", "--out", "r", "--quiet"]) == 0
    src.write_text("import numba\n\n@numba.njit\ndef f(p, q):\n    return q % 5 != 0\n")
    code = f"""
import sys
sys.path.insert(0, {str(tmp_path)!r})
from cfsweep.cli import main
sys.exit(main(["sweep", "--max-den", "40", "--predicate", "chpred:f", "--out", {str(tmp_path / 'r')!r}, "--quiet"]))
"""
    import subprocess
    import sys
    proc = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True)
    assert proc.returncode == 2 and "predicate" in proc.stderr and "other parameters" in proc.stderr


def test_stream_refuses_predicate_family():
    from cfsweep.stream import stream_prefix

    with pytest.raises(UsageError, match="predicate families are not supported"):
        stream_prefix(f"all,pred={__name__}:coprime", 10)
