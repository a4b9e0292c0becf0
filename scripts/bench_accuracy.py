#!/usr/bin/env python
"""Accuracy benchmark: read success over a fixed grid of impairments, beside a reference decoder.

Every grid cell is a synthesized scenario (one impairment at the decoding target alone, or a
few mixed); each runs N seeded trials of random track content.  For every trial two decoders
read the same detected transitions:

* readchan's decoder (timing from its bit-period tracking loop);
* a reference that is told the true bit period at every bit (from the synthesizer's cell
  boundaries), the limit a timing-recovery loop can approach on those detections.

Reported per cell: success rate of both, character error rate of readchan's decoder, and
false accepts (valid reads whose text is wrong).  Pure-noise captures (white, band-limited and
with mains hum, at several sample rates) are decoded in every format as well: any valid read
there is a false accept.

Usage: python scripts/bench_accuracy.py [--trials N] [--noise N] [--workers W] [--seed S] [--json]
"""

from __future__ import annotations

import argparse
import json
import os
import sys
import time

import numpy as np
from rich.console import Console
from rich.progress import BarColumn, MofNCompleteColumn, Progress, TextColumn, TimeRemainingColumn
from rich.table import Table
from scipy import signal as sps

from readchan.channel import DecodeSettings, decode_channel
from readchan.evaluate.runner import run_jobs
from readchan.evaluate.scenario import Scenario
from readchan.evaluate.trial import run_trials
from readchan.synth import Impairments

I = Impairments
TARGET = dict(jitter=0.08, snr_db=16.0, hum_level=1 / 3, clip=0.7)
"""Decoding targets: ±8 % jitter, 16 dB SNR, hum a third of the pulse peak, clipping at 70 %."""


def grid() -> list[tuple[str, Scenario]]:
    """The fixed grid: each target alone, then mixed conditions."""
    S = Scenario
    all_imp = I(density_error=0.05, jitter=0.08, snr_db=16.0, hum_hz=50.0, hum_level=1 / 3, wander_level=0.5,
                clip=0.7, invert=True, reverse=True)
    return [
        ("clean, 30 cm/s", S(track=1)),
        ("clean, track 2", S(track=2)),
        ("clean, track 3", S(track=3)),
        ("10 cm/s", S(speed_cm_s=10.0, profile="constant")),
        ("150 cm/s", S(speed_cm_s=150.0, profile="constant")),
        ("speed ±50 % (swipe)", S(variation=0.5)),
        ("speed ±50 % (ramp)", S(profile="ramp", variation=0.5)),
        ("150 cm/s ±50 %", S(speed_cm_s=150.0, variation=0.5)),
        ("jitter ±8 %", S(impairments=I(jitter=0.08))),
        ("density +5 %", S(impairments=I(density_error=0.05))),
        ("density −5 %", S(impairments=I(density_error=-0.05))),
        ("SNR 16 dB", S(impairments=I(snr_db=16.0))),
        ("SNR 16 dB, track 2", S(track=2, impairments=I(snr_db=16.0))),
        ("PW50 0.6 cell", S(pw50_cell=0.6)),
        ("PW50 0.6 cell, track 3", S(track=3, pw50_cell=0.6)),
        ("hum 50 Hz 1/3", S(impairments=I(hum_hz=50.0, hum_level=1 / 3))),
        ("hum 60 Hz 1/3, 10 cm/s", S(speed_cm_s=10.0, impairments=I(hum_hz=60.0, hum_level=1 / 3))),
        ("baseline wander", S(impairments=I(wander_level=0.5))),
        ("clip 70 %", S(impairments=I(clip=0.7))),
        ("inverted", S(impairments=I(invert=True))),
        ("reverse", S(impairments=I(reverse=True))),
        ("mix: hum 1/3 + SNR 16 dB", S(impairments=I(hum_level=1 / 3, snr_db=16.0))),
        ("mix: wander + clip 70 %", S(impairments=I(wander_level=0.5, clip=0.7))),
        ("mix: fast hand swipe", S(speed_cm_s=150.0, variation=0.5,
                                    impairments=I(jitter=0.08, snr_db=16.0, reverse=True))),
        ("mix: slow, hum, wander", S(speed_cm_s=10.0, profile="ramp", variation=0.5,
                                      impairments=I(hum_hz=60.0, hum_level=1 / 3, wander_level=0.5, snr_db=20.0))),
        ("mix: worn card", S(pw50_cell=0.6, impairments=I(jitter=0.08, density_error=-0.05, clip=0.7,
                                                          invert=True, reverse=True))),
        ("mix: all targets, 30 cm/s", S(variation=0.5, pw50_cell=0.6, impairments=all_imp)),
        ("mix: all targets, track 2", S(track=2, variation=0.5, pw50_cell=0.6, impairments=all_imp)),
    ]


NOISE_KINDS = ("white", "band-limited", "hum + white")
NOISE_RATES_HZ = (48_000.0, 96_000.0, 192_000.0)


def noise_trial(seed: int, k: int) -> int:
    """Valid reads found in pure-noise capture ``k``, decoded in every format (auto)."""
    rng = np.random.default_rng(np.random.SeedSequence([seed, 9_999, k]))
    kind = NOISE_KINDS[k % len(NOISE_KINDS)]
    rate = NOISE_RATES_HZ[(k // len(NOISE_KINDS)) % len(NOISE_RATES_HZ)]
    n = int(0.5 * rate)
    x = rng.normal(0.0, 0.05, n)
    if kind == "band-limited":
        # noise in the band of real pulses (a few hundred Hz to a few kHz): pulse-like wiggles
        b, a = sps.butter(2, [200.0, rng.uniform(2_000.0, 8_000.0)], btype="bandpass", fs=rate)
        x = sps.lfilter(b, a, x)
    elif kind == "hum + white":
        t = np.arange(n) / rate
        x += 0.1 * np.sin(2 * np.pi * rng.choice([50.0, 60.0]) * t + rng.uniform(0, 2 * np.pi))
    cr = decode_channel(x, rate, DecodeSettings(), source="<noise>")
    return sum(r.valid for r in cr.reads)


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--trials", type=int, default=150, help="trials per grid cell (default 150)")
    ap.add_argument("--noise", type=int, default=600, help="pure-noise captures (default 600)")
    ap.add_argument("--workers", type=int, default=None, help="worker processes (default all cores)")
    ap.add_argument("--seed", type=int, default=0, help="base seed (default 0)")
    ap.add_argument("--json", action="store_true", help="print the results as one JSON object")
    args = ap.parse_args(argv)
    if args.trials < 1 or args.noise < 0:
        print("bench_accuracy: error: --trials must be ≥ 1 and --noise ≥ 0", file=sys.stderr)
        return 2
    err = Console(stderr=True)
    cells = grid()
    scenarios = [s.__class__(**{**s.__dict__, "reference": True}) for _, s in cells]
    workers = args.workers or os.cpu_count() or 1
    t0 = time.perf_counter()
    columns = (TextColumn("{task.description}"), BarColumn(), MofNCompleteColumn(), TimeRemainingColumn())
    with Progress(*columns, console=err, transient=True, disable=not err.is_terminal) as bar:
        task = bar.add_task("grid trials", total=len(scenarios) * args.trials)
        outcomes = run_trials(scenarios, args.trials, args.seed, workers=workers,
                              progress=lambda d, t: bar.update(task, completed=d))
        noise_hits = 0
        if args.noise:
            ntask = bar.add_task("noise captures", total=args.noise)
            hits = run_jobs(noise_trial, range(args.noise), shared=(args.seed,), workers=workers,
                            progress=lambda d, t: bar.update(ntask, completed=d))
            noise_hits = sum(hits)
    elapsed = time.perf_counter() - t0

    rows = []
    for (label, sc), outs in zip(cells, outcomes):
        n = len(outs)
        rows.append({
            "cell": label,
            "track": sc.track,
            "rate_hz": sc.sample_rate_hz,
            "trials": n,
            "success_rate": sum(o.success for o in outs) / n,
            "reference_success_rate": sum(bool(o.ref_success) for o in outs) / n,
            "char_error_rate": sum(o.char_errors for o in outs) / sum(o.chars for o in outs),
            "false_accepts": sum(o.false_accepts for o in outs),
            "reference_false_accepts": sum(o.ref_false_accepts or 0 for o in outs),
        })
    total_trials = sum(r["trials"] for r in rows)
    summary = {
        "trials_per_cell": args.trials,
        "trials": total_trials,
        "success_rate": sum(r["success_rate"] * r["trials"] for r in rows) / total_trials,
        "reference_success_rate": sum(r["reference_success_rate"] * r["trials"] for r in rows) / total_trials,
        "false_accepts_grid": sum(r["false_accepts"] for r in rows),
        "noise_captures": args.noise,
        "false_accepts_noise": noise_hits,
        "elapsed_s": elapsed,
        "workers": workers,
    }
    if args.json:
        print(json.dumps({"cells": rows, "summary": summary}, indent=2))
        return 0
    print_table(rows, summary, args.trials)
    return 0


def print_table(rows: list[dict], summary: dict, trials: int) -> None:
    """The grid's rows and the summary as a rich table with the false-accept line under it."""
    out = Console(width=120) if not sys.stdout.isatty() else Console()
    t = Table(title=f"read success over the impairment grid, {trials} trials per cell")
    for col, just in (("cell", "left"), ("track", "right"), ("rate kHz", "right"), ("readchan", "right"),
                      ("reference", "right"), ("char errors", "right"), ("false accepts", "right")):
        t.add_column(col, justify=just)
    for r in rows:
        t.add_row(r["cell"], str(r["track"]), f"{r['rate_hz'] / 1000:g}", f"{100 * r['success_rate']:.1f} %",
                  f"{100 * r['reference_success_rate']:.1f} %", f"{100 * r['char_error_rate']:.2f} %",
                  str(r["false_accepts"]))
    t.add_section()
    t.add_row("all cells", "", "", f"{100 * summary['success_rate']:.1f} %",
              f"{100 * summary['reference_success_rate']:.1f} %", "", str(summary["false_accepts_grid"]))
    out.print(t)
    out.print(f"false accepts: {summary['false_accepts_grid']} in {summary['trials']} grid trials "
              f"(reference: {sum(r['reference_false_accepts'] for r in rows)}), "
              f"{summary['false_accepts_noise']} in {summary['noise_captures']} pure-noise captures")
    out.print(f"{summary['elapsed_s']:.1f} s on {summary['workers']} worker(s)")


if __name__ == "__main__":
    sys.exit(main())
