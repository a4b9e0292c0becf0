"""Capture loading speed, and the cost of wide captures whose channels hold only noise.

Three measurements (best of ``--repeat``; no clock is read in the test suite, this script is
where speeds are measured):

1. CSV parsing: a 1,000,000-row ``time_s,ch0`` table written by ``write_capture``, loaded by
   ``load_capture``.  Target: at least one million rows per second.
2. A wide CSV: ``--columns`` value columns (default 1,000) of ``--rows`` rows (default 15,600,
   one 0.325 s swipe at 48 kHz): column 1 holds a synthesized track 1 swipe, the others 16-bit
   quantised white noise of ±2 LSB (an idle logger channel).  Load time, decode time (all
   channels) and decode time per channel; the swipe must still read valid.  Target: the decode
   time grows linearly with the columns, and a noise-only channel costs a few milliseconds.
3. A FLAC whose header claims 2³⁶ samples (512 GiB as float64) but holds 48,000: load time
   and the peak memory the load allocated (tracemalloc).

Run: python scripts/bench_capture.py [--columns 1000] [--rows 15600] [--repeat 3]
"""

from __future__ import annotations

import argparse
import tempfile
import time
import tracemalloc
import warnings
from pathlib import Path

import numpy as np
import soundfile as sf

from readchan.io.capture import load_capture
from readchan.io.write import write_capture
from readchan.channel import decode_capture
from readchan.report.render import reads_of
from readchan.synth import Impairments, SynthSpec, synthesize
from readchan.synth.card import track_content

T1 = "%B9912345678901239^QUILL/ODESSA M^2912101000000000000?"   # invented card


def best(fn, repeat: int) -> tuple[float, object]:
    times, out = [], None
    for _ in range(repeat):
        t0 = time.perf_counter()
        out = fn()
        times.append(time.perf_counter() - t0)
    return min(times), out


def bench_csv_rows(tmp: Path, repeat: int) -> None:
    n = 1_000_000
    x = 0.8 * np.sin(2 * np.pi * np.arange(n) / 37.0)
    path = write_capture(tmp / "rows.csv", x, 1e6, kind="csv")
    t, cap = best(lambda: load_capture(path), repeat)
    assert cap.n_samples == n
    print(f"CSV rows: {n:,} rows, {path.stat().st_size / 1e6:.1f} MB, loaded in {t:.3f} s "
          f"-> {n / t / 1e6:.2f} million rows/s (target >= 1)")


def bench_wide(tmp: Path, columns: int, rows: int, repeat: int) -> None:
    res = synthesize(SynthSpec(tracks=(track_content(T1, track=1),), impairments=Impairments(snr_db=40.0), seed=1))
    swipe = res.samples[:rows, 0]
    rows = swipe.size
    rng = np.random.default_rng(0)
    data = np.round(rng.normal(0.0, 2.0, (rows, columns))) / 32768.0
    data[:, 0] = swipe
    for k in sorted({1, max(1, columns // 10), columns}):
        path = tmp / f"wide{k}.csv"
        write_capture(path, data[:, :k], res.rate_hz, kind="csv")
        t_load, cap = best(lambda: load_capture(path), repeat)
        t_dec, results = best(lambda: decode_capture(cap), repeat)
        valid = [r.frame.text for r in reads_of(results) if r.valid]
        states = {}
        for ch in results:
            state = ch.status.state if ch.status is not None else "?"
            states[state] = states.get(state, 0) + 1
        print(f"wide CSV: {k:5d} columns x {rows} rows ({path.stat().st_size / 1e6:6.1f} MB): load {t_load:6.2f} s, "
              f"decode {t_dec:6.2f} s ({1e3 * t_dec / k:5.1f} ms/channel); swipe valid: {valid == [T1]}; "
              f"channel states {states}")


def bench_flac_claim(tmp: Path, repeat: int) -> None:
    path = tmp / "claims.flac"
    sf.write(path, 0.5 * np.sin(np.arange(48_000) / 7.0), 48_000, subtype="PCM_24")
    data = bytearray(path.read_bytes())
    packed = int.from_bytes(data[18:26], "big")                  # STREAMINFO: 36-bit total samples
    data[18:26] = ((packed & ~((1 << 36) - 1)) | ((1 << 36) - 1)).to_bytes(8, "big")
    path.write_bytes(bytes(data))

    def load():
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            return load_capture(path)

    t, cap = best(load, repeat)
    tracemalloc.start()
    load()
    peak = tracemalloc.get_traced_memory()[1]
    tracemalloc.stop()
    print(f"FLAC claiming 2^36 samples: loaded {cap.n_samples:,} samples in {t * 1e3:.0f} ms, "
          f"peak allocation {peak / 1e6:.1f} MB")


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--columns", type=int, default=1000)
    ap.add_argument("--rows", type=int, default=15_600)
    ap.add_argument("--repeat", type=int, default=3)
    args = ap.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        bench_csv_rows(Path(tmp), args.repeat)
        bench_wide(Path(tmp), args.columns, args.rows, args.repeat)
        bench_flac_claim(Path(tmp), args.repeat)


if __name__ == "__main__":
    main()
