"""cfsweep: exact and sampled statistics of continued-fraction partial quotients of rationals.

Public API::

    run = cfsweep.sweep(max_den=20000, out="runs/a", family="all", words=3)
    table = cfsweep.frequency_table(run)      # pyarrow.Table, columns in cfsweep.schema
"""
__version__ = "0.1.0"

from .errors import RunIntegrityError, UsageError  # noqa: E402
from .families import Family, parse_family  # noqa: E402
from .runs import Run, open_run, sweep  # noqa: E402
from .tables import analyse, frequency_table  # noqa: E402
from .stream import analyse_stream, decimals, iter_stream, write_stream  # noqa: E402
from .exact import exact_counts, exact_table  # noqa: E402
from .runs import sample  # noqa: E402
from .good import good_proportion  # noqa: E402
from .status import run_status  # noqa: E402

__all__ = ["sweep", "open_run", "Run", "frequency_table", "analyse", "parse_family", "Family",
           "UsageError", "RunIntegrityError", "__version__",
           "iter_stream", "write_stream", "analyse_stream", "decimals", "exact_counts", "exact_table",
           "sample", "good_proportion", "run_status"]
