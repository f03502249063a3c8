"""Run every benchmark (``bench_*.py`` beside this file) and print its figures.

Usage: ``python tests/benchmarks/run.py [NAME ...]`` — names select benchmarks by substring
(``python tests/benchmarks/run.py engine colour``). Benchmarks are run by hand, not by pytest:
timings on a shared machine vary, so each benchmark measures its own baseline in the same run.
"""

from __future__ import annotations

import subprocess
import sys
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent


def main(argv: list[str]) -> int:
    scripts = sorted(HERE.glob("bench_*.py"))
    if argv:
        scripts = [s for s in scripts if any(a in s.stem for a in argv)]
    failed = []
    for script in scripts:
        print(f"=== {script.stem} ===", flush=True)
        t0 = time.perf_counter()
        rc = subprocess.call([sys.executable, str(script)], cwd=HERE.parents[1])
        print(f"--- {script.stem}: exit {rc}, {time.perf_counter() - t0:.1f} s\n", flush=True)
        if rc:
            failed.append(script.stem)
    if failed:
        print("benchmarks that failed or missed their budget:", ", ".join(failed))
    return 1 if failed else 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
