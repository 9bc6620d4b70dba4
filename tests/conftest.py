import os
import sys
from pathlib import Path

sys.path.insert(0, str(Path(__file__).parent))
os.environ.setdefault("MPLBACKEND", "Agg")

from hypothesis import settings  # noqa: E402

settings.register_profile("cfsweep", max_examples=40, deadline=None, derandomize=True)
settings.load_profile("cfsweep")
