"""Loading a benchmark script of bench/ as a module, for the tests that check what it counts."""
import importlib.util
import sys
from pathlib import Path

BENCH_DIR = Path(__file__).resolve().parents[1] / "bench"


def load_bench(filename: str, module_name: str):
    spec = importlib.util.spec_from_file_location(module_name, BENCH_DIR / filename)
    module = importlib.util.module_from_spec(spec)
    # Numba's cache finds the module of a cached function through sys.modules
    sys.modules[spec.name] = module
    spec.loader.exec_module(module)
    return module
