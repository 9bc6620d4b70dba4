"""The one place that sets Numba decorator options for cfsweep kernels.

Policy (see DEVELOPERS.md): no ``fastmath`` in integer kernels; ``error_model="numpy"`` so that the
zero-division check does not block vectorisation; ``cache=True`` only for module-level kernels that take
no function arguments.
"""
import numba

SERIAL = dict(nogil=True, cache=True, error_model="numpy")
PARALLEL = dict(nogil=True, cache=True, error_model="numpy", parallel=True)
# Kernels that receive a jitted user function as an argument must not be cached.
UNCACHED = dict(nogil=True, cache=False, error_model="numpy")

serial = numba.njit(**SERIAL)
# Small helpers that take arrays and run per occurrence inside a kernel's loop: inlined in Numba's IR,
# so that the call costs no atomic reference-count updates of the array arguments.
inline = numba.njit(inline="always", **SERIAL)
parallel = numba.njit(**PARALLEL)
