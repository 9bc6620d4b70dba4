"""The commands work with the runtime dependencies only (test-only packages blocked from import)."""
import subprocess
import sys

CODE = r"""
import sys
for name in ("sympy", "duckdb", "polars", "hypothesis", "psutil", "distributed", "dask"):
    sys.modules[name] = None  # any import of these now raises ImportError
from cfsweep.cli import main
out = sys.argv[1]
steps = [
    ["sweep", "--max-den", "60", "--family", "squarefree", "--good-eps", "0.2", "--out", out + "/a", "--quiet"],
    ["table", out + "/a"],
    ["good", out + "/a"],
    ["sample", "--den-range", "1e15:2e15", "--samples", "500", "--seed", "3", "--family", "prime",
     "--out", out + "/s", "--quiet"],
    ["table", out + "/s"],
    ["exact", "--max-den", "500"],
    ["stream", "--terms", "1000", "--out", out + "/stream.parquet", "--decimals", "20"],
    ["status", out + "/a"],
]
for step in steps:
    code = main(step)
    if code != 0:
        raise SystemExit(f"{step[0]} exited {code}")
print("all commands ran")
"""


def test_commands_need_only_runtime_dependencies(tmp_path):
    proc = subprocess.run([sys.executable, "-c", CODE, str(tmp_path)], capture_output=True, text=True, timeout=600)
    assert proc.returncode == 0, proc.stderr[-2000:]
    assert "all commands ran" in proc.stdout
