"""Numba kernels of cfsweep (imported as ``cfsweep.kernels``).

Pure integer/float array code: no I/O, no logging, no Python objects. Orchestration lives in
``cfsweep`` itself; every kernel here has a slow plain-Python twin in ``tests/``.
"""
