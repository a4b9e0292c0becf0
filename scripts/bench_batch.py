"""Batch decode: ``readchan decode DIR --jsonl`` over a folder of synthesized captures.

Writes N (default 240) seeded captures (one card track each: tracks 1 and 2, 25–60 cm/s,
SNR 24–40 dB, jitter up to 4 %, some reversed, one in ten a quiet capture with no swipe), then
runs the command line over the folder with ``--jobs 1`` and ``--jobs J`` in turn, ``--repeat``
times each, side by side.  Prints the closing summary of the last run of each, the median wall
time of each, captures per second and the speed-up, and the load (``os.getloadavg``).

Run: python scripts/bench_batch.py [--captures 240] [--jobs 2] [--repeat 3] [--keep DIR]
"""

from __future__ import annotations

import argparse
import json
import os
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from readchan.io.capture import write_capture  # noqa: E402
from readchan.synth import Impairments, SpeedProfile, SynthSpec, synthesize  # noqa: E402
from readchan.synth.card import track_content  # noqa: E402

T1 = "%B9912345678901239^QUILL/ODESSA M^2912101000000000000?"      # invented card (fixtures/README.md)
T2 = ";9912345678901239=29121010000000000?"


def make_folder(folder: Path, n: int) -> None:
    rng = np.random.default_rng(2026)
    for k in range(n):
        track = 1 if k % 2 == 0 else 2
        path = folder / f"station-{k // 50:02d}" / f"swipe-{k:04d}.wav"
        path.parent.mkdir(parents=True, exist_ok=True)
        if k % 10 == 9:                                   # nobody swiped: noise only
            x = rng.normal(0.0, 1e-3, 24_000)
            write_capture(path, x, 48_000.0)
            continue
        imp = Impairments(snr_db=float(rng.uniform(24, 40)), jitter=float(rng.uniform(0, 0.04)),
                          reverse=bool(rng.random() < 0.3))
        spec = SynthSpec(tracks=(track_content(T1 if track == 1 else T2, track=track),),
                         speed=SpeedProfile(float(rng.uniform(25, 60)), "swipe", 0.2), impairments=imp, seed=k)
        res = synthesize(spec)
        write_capture(path, res.samples, res.rate_hz)


def run(folder: Path, jobs: int) -> tuple[float, str, list[dict]]:
    start = time.perf_counter()
    done = subprocess.run([sys.executable, "-m", "readchan", "decode", "--jsonl", "--jobs", str(jobs), str(folder)],
                          cwd=ROOT, capture_output=True, text=True)
    elapsed = time.perf_counter() - start
    if done.returncode not in (0, 1, 3):
        raise SystemExit(f"decode exited {done.returncode}: {done.stderr[-2000:]}")
    return elapsed, done.stderr, [json.loads(line) for line in done.stdout.splitlines()]


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--captures", type=int, default=240)
    ap.add_argument("--jobs", type=int, default=2)
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--keep", type=Path, default=None, help="make the folder here and keep it")
    args = ap.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        folder = args.keep or Path(tmp) / "captures"
        folder.mkdir(parents=True, exist_ok=True)
        t0 = time.perf_counter()
        make_folder(folder, args.captures)
        print(f"{args.captures} captures synthesized in {time.perf_counter() - t0:.1f} s into {folder}")
        times: dict[int, list[float]] = {1: [], args.jobs: []}
        last: dict[int, tuple[str, list[dict]]] = {}
        for _ in range(args.repeat):
            for jobs in times:                       # side by side: each repeat runs both
                elapsed, summary, records = run(folder, jobs)
                times[jobs].append(elapsed)
                last[jobs] = (summary, records)
        assert [r["source"] for r in last[1][1]] == [r["source"] for r in last[args.jobs][1]], "order differs"
        for jobs, (summary, records) in last.items():
            print(f"--jobs {jobs}: closing summary of the last run")
            print(summary.rstrip())
        med = {j: statistics.median(v) for j, v in times.items()}
        for j, m in med.items():
            print(f"--jobs {j}: median {m:.2f} s of {args.repeat} runs ({', '.join(f'{t:.2f}' for t in times[j])}), "
                  f"{args.captures / m:.1f} captures/s")
        if args.jobs != 1:
            print(f"speed-up --jobs {args.jobs} over --jobs 1: {med[1] / med[args.jobs]:.2f}x")
        print("load average (1, 5, 15 min):", " ".join(f"{v:.2f}" for v in os.getloadavg()))


if __name__ == "__main__":
    main()
