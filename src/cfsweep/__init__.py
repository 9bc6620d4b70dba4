"""cfsweep: exact and sampled statistics of continued-fraction partial quotients of rationals."""
__version__ = "0.1.0"
