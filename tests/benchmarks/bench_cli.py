"""Start-up of the ``filmstack`` command (issue: ``--help`` and a small spectrum well under 1 s).

Runs each command several times in a fresh process and prints the best and median wall times,
next to two baselines measured in the same run: an empty Python and ``import numpy`` (which every
filmstack command needs). Also lists the heavy libraries each command imported, which must be
none for ``--help`` and a table-only ``spectrum``.

Usage: ``python tests/benchmarks/bench_cli.py`` (or ``python tests/benchmarks/run.py cli``).
"""

from __future__ import annotations

import os
import statistics
import subprocess
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
LENS = str(ROOT / "examples" / "lens-ar.yaml")
RUNS = 7
HEAVY = ("matplotlib", "scipy.optimize", "colour")

PROBE = """
import sys, runpy
sys.argv = ["filmstack"] + sys.argv[1:]
try:
    runpy.run_module("filmstack", run_name="__main__")
except SystemExit:
    pass
print("HEAVY:" + ",".join(m for m in {heavy!r} if m in sys.modules), file=sys.stderr)
"""


def timed(cmd: list[str]) -> tuple[float, float]:
    env = dict(os.environ, PYTHONPATH=str(ROOT))
    times = []
    for _ in range(RUNS):
        t0 = time.perf_counter()
        subprocess.run(cmd, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, env=env,
                       cwd=ROOT, check=False)
        times.append(time.perf_counter() - t0)
    return min(times), statistics.median(times)


def heavy_imports(args: list[str]) -> str:
    env = dict(os.environ, PYTHONPATH=str(ROOT))
    proc = subprocess.run([sys.executable, "-c", PROBE.format(heavy=HEAVY), *args],
                          capture_output=True, text=True, env=env, cwd=ROOT)
    line = [ln for ln in proc.stderr.splitlines() if ln.startswith("HEAVY:")]
    return (line[-1][6:] or "none") if line else "?"


def main() -> int:
    py = sys.executable
    out_png = str(Path(os.environ.get("TMPDIR", "/tmp")) / "filmstack-bench-cli.png")
    cases = [
        ("baseline: python -c pass", [py, "-c", "pass"], None),
        ("baseline: import numpy", [py, "-c", "import numpy"], None),
        ("filmstack --help", [py, "-m", "filmstack", "--help"], ["--help"]),
        ("filmstack spectrum --help", [py, "-m", "filmstack", "spectrum", "--help"],
         ["spectrum", "--help"]),
        ("spectrum lens-ar, 61 wl (table)",
         [py, "-m", "filmstack", "spectrum", LENS, "--step", "5"], ["spectrum", LENS, "--step", "5"]),
        ("spectrum lens-ar, 61 wl --json",
         [py, "-m", "filmstack", "spectrum", LENS, "--step", "5", "--json"], None),
        ("spectrum lens-ar --plot (matplotlib)",
         [py, "-m", "filmstack", "spectrum", LENS, "--step", "5", "--plot", out_png], None),
    ]
    print(f"{'command':40s} {'best s':>8s} {'median s':>9s}  heavy imports")
    for name, cmd, probe in cases:
        best, med = timed(cmd)
        heavy = heavy_imports(probe) if probe else ""
        print(f"{name:40s} {best:8.3f} {med:9.3f}  {heavy}", flush=True)
    return 0


if __name__ == "__main__":
    sys.exit(main())
