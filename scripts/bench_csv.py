"""Loading a large oscilloscope CSV: peak memory and time of :func:`readchan.io.capture.load_capture`,
side by side for two checkouts of readchan (before and after a change), each load in a fresh process.

The CSV (invented data): a time column and ``--channels`` value columns of Gaussian noise at
1 MHz, ``--rows`` rows, written as a scope exports them (``Time (s),CH1 (V),...``, ``%.7e``).

For each checkout (``--tree``, default this one and /work/main) the script prints, over
``--repeat`` fresh processes (medians): wall time of the load, peak RSS of the process
(``ru_maxrss`` of a child that does nothing else; the CSV is built in a child of its own, since a
child's peak RSS starts from its parent's), the RSS of
the same child with its imports done and no load (so the load's own share is the difference),
and a digest of the samples, rate, units and channel names, which must agree between the trees.

Threads: ``OMP_NUM_THREADS=1`` unless set.  The machine is shared: the load average
(``/proc/loadavg``) is printed before and after.

Run: ``python scripts/bench_csv.py [--rows 5000000] [--channels 2] [--repeat 5] [--tree DIR]...``.
"""

from __future__ import annotations

import argparse
import os
import statistics
import subprocess
import sys
import tempfile
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]

CHILD = r"""
import hashlib, resource, sys, time
import readchan
assert readchan.__file__.startswith(sys.argv[3]), (readchan.__file__, sys.argv[3])
import numpy as np
from readchan.io.capture import load_capture
if sys.argv[2] == "load":
    t0 = time.perf_counter()
    cap = load_capture(sys.argv[1])
    dt = time.perf_counter() - t0
    peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss      # before the digest, which copies nothing
    h = hashlib.sha256(memoryview(np.ascontiguousarray(cap.samples)).cast("B"))
    h.update(repr((cap.rate_hz, cap.units, cap.channel_names)).encode())
    print(dt, peak, h.hexdigest()[:16])
else:
    print(0.0, resource.getrusage(resource.RUSAGE_SELF).ru_maxrss, "-")
"""


def build(path: Path, rows: int, channels: int) -> None:
    """Write the CSV in blocks of rows."""
    import numpy as np

    rng = np.random.default_rng(7)
    with open(path, "w") as fh:
        fh.write("Time (s)," + ",".join(f"CH{c + 1} (V)" for c in range(channels)) + "\n")
        step = max(1, 2_000_000 // (channels + 1))
        for a in range(0, rows, step):
            n = min(step, rows - a)
            block = np.column_stack([(a + np.arange(n)) / 1e6, rng.normal(0.0, 0.1, (n, channels))])
            np.savetxt(fh, block, fmt="%.7e", delimiter=",")


def run(tree: Path, path: Path, what: str) -> tuple[float, int, str]:
    env = dict(os.environ, PYTHONPATH=str(tree))
    env.setdefault("OMP_NUM_THREADS", "1")
    # run in the tree: ``python -c`` puts the working directory first on sys.path
    out = subprocess.run([sys.executable, "-c", CHILD, str(path), what, str(tree)], env=env, cwd=tree, capture_output=True,
                         text=True, check=True).stdout.split()
    return float(out[0]), int(out[1]), out[2]


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--rows", type=int, default=5_000_000)
    ap.add_argument("--channels", type=int, default=2)
    ap.add_argument("--repeat", type=int, default=5)
    ap.add_argument("--tree", action="append", type=Path, help="a readchan checkout (repeatable)")
    ap.add_argument("--build", type=Path, help=argparse.SUPPRESS)
    args = ap.parse_args()
    if args.build is not None:
        build(args.build, args.rows, args.channels)
        return
    trees = args.tree or [ROOT, Path("/work/main")]
    print("load average before:", Path("/proc/loadavg").read_text().strip())
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "scope.csv"
        # built in a child: a child's peak RSS starts from its parent's, which must stay small
        subprocess.run([sys.executable, __file__, "--build", str(path), "--rows", str(args.rows), "--channels",
                        str(args.channels)], check=True)
        mb = path.stat().st_size / 1e6
        arr_mb = args.rows * args.channels * 8 / 1e6
        print(f"{path.name}: {args.rows} rows, {args.channels} value columns, {mb:.0f} MB of text; "
              f"the samples are {arr_mb:.0f} MB of float64")
        rows = {}
        for _ in range(args.repeat):            # interleaved, so load drifts hit every tree alike
            for tree in trees:
                base = run(tree, path, "base")[1]
                t, rss, digest = run(tree, path, "load")
                rows.setdefault(tree, []).append((t, rss, base, digest))
        ref = None
        for tree, got in rows.items():
            t = statistics.median(g[0] for g in got)
            rss = statistics.median(g[1] for g in got) / 1024
            base = statistics.median(g[2] for g in got) / 1024
            digests = {g[3] for g in got}
            ref = ref or t
            print(f"{str(tree):28s} load {t:6.2f} s (×{t / ref:.2f})  peak RSS {rss:6.0f} MB, of which the load "
                  f"{rss - base:6.0f} MB = {(rss - base) / arr_mb:.2f}× the samples  digest {','.join(digests)}")
    print("load average after:", Path("/proc/loadavg").read_text().strip())


if __name__ == "__main__":
    main()
