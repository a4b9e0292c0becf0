"""Tape decode throughput: LTC at 1× and at 10× shuttle, and a 1200-baud Kansas City capture.

For each synthesized capture (in memory, decode only, median of ``--repeat`` runs) prints the
seconds of capture decoded per second of wall time, frames (or bytes) decoded per second of
wall time, and samples per second; and checks that every frame or byte was read.

Run: PYTHONPATH=. python scripts/bench_tape.py [--seconds 20] [--repeat 5]
"""

from __future__ import annotations

import argparse
import statistics
import time

from readchan.formats.kcs.read import decode_kcs
from readchan.formats.ltc import decode_ltc
from readchan.synth.playback import Playback, PlaySpeed
from readchan.synth.kcs import KcsSpec, synthesize_kcs
from readchan.synth.ltc import LtcSpec, synthesize_ltc


def _median_s(fn, repeat: int) -> tuple[float, object]:
    times, out = [], None
    for _ in range(repeat):
        t0 = time.perf_counter()
        out = fn()
        times.append(time.perf_counter() - t0)
    return statistics.median(times), out


def _row(name: str, n_samples: int, rate_hz: float, wall_s: float, items: int, unit: str, ok: bool) -> None:
    capture_s = n_samples / rate_hz
    print(f"{name:<34} {capture_s:7.1f} s  {wall_s * 1e3:8.1f} ms  {capture_s / wall_s:8.1f} s/s  "
          f"{items / wall_s:10.0f} {unit}/s  {n_samples / wall_s / 1e6:7.2f} Msamples/s  "
          f"{'all read' if ok else 'MISSED SOME'}")


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--seconds", type=float, default=20.0)
    ap.add_argument("--repeat", type=int, default=5)
    args = ap.parse_args()
    print(f"{'capture':<34} {'length':>9}  {'decode':>11}  {'realtime':>10}  {'items':>16}  {'samples':>17}")

    s = synthesize_ltc(LtcSpec(duration_s=args.seconds, rate_fps=25.0, playback=Playback(snr_db=30), seed=1))
    wall, r = _median_s(lambda: decode_ltc(s.samples, s.rate_hz), args.repeat)
    _row("LTC 25 fps, 1x, 48 kHz", s.samples.size, s.rate_hz, wall, len(r.frames), "frames",
         [f.timecode for f in r.frames] == [f.timecode for f in s.frames])

    s = synthesize_ltc(LtcSpec(duration_s=args.seconds / 4, rate_fps=30.0, speed=PlaySpeed.constant(10.0),
                               rate_hz=192_000.0, playback=Playback(snr_db=30), seed=2))
    wall, r = _median_s(lambda: decode_ltc(s.samples, s.rate_hz), args.repeat)
    _row("LTC 30 fps, 10x shuttle, 192 kHz", s.samples.size, s.rate_hz, wall, len(r.frames), "frames",
         [f.timecode for f in r.frames] == [f.timecode for f in s.frames])

    n_bytes = int(args.seconds * 1200 / 11)
    k = synthesize_kcs(KcsSpec(data=bytes(i % 256 for i in range(n_bytes)), baud=1200, leader_s=0.5,
                               playback=Playback(snr_db=30, band_hz=(300.0, 3500.0)), seed=3))
    wall, r = _median_s(lambda: decode_kcs(k.samples, k.rate_hz), args.repeat)
    _row("KCS 1200 baud, 48 kHz", k.samples.size, k.rate_hz, wall, len(r.data), "bytes",
         r.data == k.data and not r.framing_errors)


if __name__ == "__main__":
    main()
