"""Errors that the command line reports as one line with exit code 2."""


class UsageError(ValueError):
    """Bad input from the user: the message names the bad value and the allowed range."""


class RunIntegrityError(RuntimeError):
    """A run directory is incomplete or inconsistent; the message names the blocks concerned."""
