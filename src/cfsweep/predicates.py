"""User predicates: a Numba-jitted function ``(p, q) -> bool`` that narrows a family.

A predicate is given from Python (``cfsweep.sweep(..., predicate=fn)``) or on the command line as
``module:function`` (importable on every machine that runs blocks). It is checked before any block
runs: it must be a Numba dispatcher (``@numba.njit``), compile for (int64, int64), return a boolean,
and not raise on a few sample pairs. Its identity (module, name, sha256 of its source when available)
is stored in the run's manifest, so a changed predicate cannot resume an old run.
"""
from __future__ import annotations

import hashlib
import importlib
import inspect
from dataclasses import replace

from .errors import UsageError

_REGISTRY: dict[str, object] = {}


def identity(fn) -> dict:
    """{"name": "module:function", "module", "function", "source_sha256" (None if unavailable)}."""
    py = getattr(fn, "py_func", fn)
    module = getattr(py, "__module__", "?")
    name = getattr(py, "__qualname__", getattr(py, "__name__", "?"))
    try:
        source_hash = hashlib.sha256(inspect.getsource(py).encode()).hexdigest()
    except (OSError, TypeError):
        source_hash = None
    return {"name": f"{module}:{name}", "module": module, "function": name, "source_sha256": source_hash}


def check_predicate(fn) -> dict:
    """Refuse anything but a jitted (int64, int64) -> bool function; return its identity."""
    from numba import types
    from numba.core.registry import CPUDispatcher

    if not isinstance(fn, CPUDispatcher):
        raise UsageError(f"predicate {fn!r} is not a Numba-jitted function; allowed: a function decorated "
                         "with @numba.njit taking (p, q) and returning bool")
    try:
        fn.compile((types.int64, types.int64))
    except Exception as exc:  # numba raises many error kinds; all mean the same thing here
        first = str(exc).strip().splitlines()[0] if str(exc).strip() else type(exc).__name__
        raise UsageError(f"predicate {identity(fn)['name']} does not compile for (p, q) int64 arguments: "
                         f"{first}") from None
    sig = [s for s in fn.nopython_signatures if tuple(s.args) == (types.int64, types.int64)][0]
    if sig.return_type != types.boolean:
        raise UsageError(f"predicate {identity(fn)['name']} returns {sig.return_type}; allowed: bool")
    for p, q in ((1, 2), (2, 3), (3, 10), (5, 12)):
        try:
            fn(p, q)
        except Exception as exc:
            raise UsageError(f"predicate {identity(fn)['name']} raised {type(exc).__name__} on "
                             f"(p, q) = ({p}, {q}): {exc}") from None
    info = identity(fn)
    _REGISTRY[info["name"]] = fn
    return info


def resolve(spec: str):
    """The predicate named ``module:function`` (from this process's registry, else imported)."""
    if spec in _REGISTRY:
        return _REGISTRY[spec]
    module_name, sep, func_name = spec.partition(":")
    if not sep or not module_name or not func_name:
        raise UsageError(f"predicate {spec!r} is not module:function; allowed: e.g. mypreds:odd_denominator")
    try:
        module = importlib.import_module(module_name)
    except ImportError:
        # the command line runs from the user's directory: let it import modules kept there
        import os
        import sys

        if os.getcwd() not in sys.path:
            sys.path.insert(0, os.getcwd())
        try:
            module = importlib.import_module(module_name)
        except ImportError as exc:
            raise UsageError(f"predicate module {module_name!r} cannot be imported: {exc}") from None
    obj = module
    for part in func_name.split("."):
        obj = getattr(obj, part, None)
        if obj is None:
            raise UsageError(f"predicate {spec!r}: module {module_name!r} has no {func_name!r}")
    return obj


def family_with_predicate(family, predicate):
    """The family narrowed by ``predicate`` (a jitted function or a "module:function" string)."""
    fn = resolve(predicate) if isinstance(predicate, str) else predicate
    info = check_predicate(fn)
    return replace(family, predicate=fn, predicate_name=info["name"])
