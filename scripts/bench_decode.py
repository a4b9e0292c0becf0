"""Decode throughput: a synthesized 60 s, 48 kHz capture holding many swipes.

Prints samples per second of the whole decode (load excluded) and the ratio of decode time to
the time soundfile takes just to read the same file.  Target: >= 10 million samples/s on one core.

Run: python scripts/bench_decode.py [--seconds 60] [--rate 48000] [--repeat 3]
"""

from __future__ import annotations

import argparse
import os
import tempfile
import time
from pathlib import Path

import soundfile as sf

from readchan.io.capture import load_capture
from readchan.io.write import write_capture
from readchan.channel import decode_capture
from readchan.report.render import reads_of
from readchan.synth import Impairments, SpeedProfile, SynthSpec, synthesize
from readchan.synth.card import track_content

T1 = "%B9912345678901239^QUILL/ODESSA M^2912101000000000000?"   # invented card


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--seconds", type=float, default=60.0)
    ap.add_argument("--rate", type=float, default=48_000.0)
    ap.add_argument("--repeat", type=int, default=3)
    args = ap.parse_args()
    speed = SpeedProfile(40.0, "swipe", 0.3)
    gap_s = 0.25
    one = synthesize(SynthSpec(tracks=(track_content(T1, track=1),), speed=speed, rate_hz=args.rate, lead_s=0.0))
    swipes = max(1, int(args.seconds / (one.duration_s + gap_s)))
    spec = SynthSpec(tracks=(track_content(T1, track=1),), speed=speed, rate_hz=args.rate, swipes=swipes,
                     gap_s=gap_s, impairments=Impairments(snr_db=30.0, jitter=0.03, hum_level=0.05), seed=1)
    res = synthesize(spec)
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "bench.wav"
        write_capture(path, res.samples, res.rate_hz, kind="wav16")
        n = res.samples.shape[0]
        t_read, t_decode = [], []
        for _ in range(args.repeat):
            t0 = time.perf_counter()
            sf.read(path)
            t_read.append(time.perf_counter() - t0)
            cap = load_capture(path)
            t0 = time.perf_counter()
            results = decode_capture(cap)
            t_decode.append(time.perf_counter() - t0)
        reads = reads_of(results)
    td, tr = min(t_decode), min(t_read)
    good = sum(r.valid and r.frame.text == T1 for r in reads)
    print(f"capture: {n} samples ({n / args.rate:.1f} s at {args.rate:g} Hz), {swipes} swipes")
    print(f"decoded: {len(reads)} reads, {good} valid with the right text")
    print(f"decode time (best of {args.repeat}): {td:.3f} s  ->  {n / td / 1e6:.1f} million samples/s")
    print(f"soundfile read time: {tr:.4f} s; decode / read = {td / tr:.1f}")
    print(f"threads: OMP/OPENBLAS = {os.environ.get('OMP_NUM_THREADS', 'default')}"
          f"/{os.environ.get('OPENBLAS_NUM_THREADS', 'default')}")


if __name__ == "__main__":
    main()
