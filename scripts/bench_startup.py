"""Start-up time of the command line: ``python -m readchan --help`` (wall time, median of 5) and the
cumulative import time of ``readchan.cli.main`` from ``python -X importtime`` (median of 5).

Run from the repository root: ``python scripts/bench_startup.py``.
"""

from __future__ import annotations

import re
import statistics
import subprocess
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
RUNS = 5
TARGET_S = 0.8


def wall_s() -> float:
    t0 = time.perf_counter()
    subprocess.run([sys.executable, "-m", "readchan", "--help"], cwd=ROOT, capture_output=True, check=True)
    return time.perf_counter() - t0


def import_s() -> float:
    err = subprocess.run([sys.executable, "-X", "importtime", "-m", "readchan", "--help"], cwd=ROOT,
                         capture_output=True, text=True, check=True).stderr
    us = [int(m.group(1)) for m in re.finditer(r"^import time:\s+\d+ \|\s+(\d+) \| readchan\.cli\.main$", err, re.M)]
    return us[0] / 1e6


def main() -> int:
    wall = statistics.median(wall_s() for _ in range(RUNS))
    imp = statistics.median(import_s() for _ in range(RUNS))
    print(f"python -m readchan --help: {wall:.3f} s wall (median of {RUNS}); "
          f"import of readchan.cli.main: {imp:.3f} s cumulative (median of {RUNS}); target < {TARGET_S} s")
    return 0 if wall < TARGET_S else 1


if __name__ == "__main__":
    sys.exit(main())
