"""Long-capture decode throughput and memory: three ten-minute 48 kHz 16-bit WAV captures (and a
two-hour one with ``--long``), decoded from their files, each decode in a fresh process.

Captures (invented card data, synthesized with :mod:`readchan.synth`):

* ``idle``: a reader idle most of the time, track 1 swipes at about 40 cm/s with 2 s gaps;
* ``bench``: bench density, 0.25 s gaps;
* ``continuous``: back-to-back swipes, no gap;
* ``long`` (``--long``): the idle reader for two hours.

Each capture is built from a few distinct synthesized stretches of several swipes (different
seeds), repeated to the length asked for; every stretch is a whole number of mains cycles long,
so the hum runs on without a phase jump from one to the next.

For each capture the script prints, from ``--repeat`` fresh processes each (medians):

* the reference: a plain read of the file (``soundfile.read``, float64) plus one 8th-order
  Butterworth ``sosfilt`` pass over it, timed in its own fresh process right before each decode;
* the decode (``--api stream``, the default: :func:`readchan.stream.decode_file`, every read
  kept in a list; ``--api iter``: :func:`readchan.stream.iter_reads`, each read dropped once
  counted, as a JSON Lines writer would; ``--api whole``:
  ``load_capture`` + ``decode_capture``): cold (the first decode in a fresh
  process, imports done, so any compilation or cache load counts) and warm (a second decode in
  the same process), samples per second, and the ratio to the reference;
* peak RSS of the decoding process (``resource.getrusage``, ``ru_maxrss``);
* passes: the fresh memory the decode writes, in full-length float64 arrays (minor page faults
  × page size / 8 bytes per sample, in one more untimed process with numpy's huge pages off so
  that every fault is one 4 kB page: arrays this large are fresh ``mmap`` pages every time, so
  this counts the full-length arrays made), and the decode time in full-length passes (warm
  time over the time of one ``np.multiply(x, 2.0, out=y)`` over the whole capture);
* the reads found against the swipes synthesized.

Threads: the workers run with ``OMP_NUM_THREADS=1`` (and the BLAS equivalents) unless set.
The machine is shared: the load average (``/proc/loadavg``) is printed before and after.

Run: ``OMP_NUM_THREADS=1 python scripts/bench_stream.py [--minutes 10] [--repeat 5] [--long]
[--only idle,bench] [--fresh-cache] [--api iter|whole]``.
"""

from __future__ import annotations

import argparse
import json
import os
import resource
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
T1 = "%B9912345678901239^QUILL/ODESSA M^2912101000000000000?"   # invented card
RATE_HZ = 48_000
HUM_HZ = 50.0
GAPS_S = {"idle": 2.0, "bench": 0.25, "continuous": 0.0, "long": 2.0}
SWIPES_PER_STRETCH = 8
DISTINCT_STRETCHES = 4
THREAD_VARS = ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS", "NUMBA_NUM_THREADS")


# -- building the captures ---------------------------------------------------------------------

def _stretch(gap_s: float, seed: int):
    """One synthesized stretch of swipes, ``gap_s`` apart, half a gap of quiet at either end,
    cut to a whole number of mains cycles; samples as a 1-D float64 array."""
    from readchan.synth import Impairments, SpeedProfile, SynthSpec, synthesize
    from readchan.synth.card import track_content

    spec = SynthSpec(tracks=(track_content(T1, track=1),), speed=SpeedProfile(40.0, "swipe", 0.3),
                     rate_hz=float(RATE_HZ), swipes=SWIPES_PER_STRETCH, gap_s=gap_s, lead_s=gap_s / 2,
                     impairments=Impairments(snr_db=30.0, jitter=0.03, hum_hz=HUM_HZ, hum_level=0.05), seed=seed)
    x = synthesize(spec).samples[:, 0]
    cycle = int(round(RATE_HZ / HUM_HZ))
    return x[: x.size // cycle * cycle]


def build(path: Path, gap_s: float, seconds: float) -> tuple[int, int]:
    """Write a capture of about ``seconds`` to ``path`` (16-bit WAV, written stretch by stretch);
    returns (samples, swipes)."""
    import soundfile as sf

    stretches = [_stretch(gap_s, seed) for seed in range(1, DISTINCT_STRETCHES + 1)]
    want = int(seconds * RATE_HZ)
    n = swipes = k = 0
    with sf.SoundFile(path, "w", samplerate=RATE_HZ, channels=1, subtype="PCM_16", format="WAV") as snd:
        while n < want:
            x = stretches[k % len(stretches)]
            snd.write(x)
            n += x.size
            swipes += SWIPES_PER_STRETCH
            k += 1
    return n, swipes


# -- the workers (one fresh process each) ------------------------------------------------------

def _rss_mb() -> float:
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0     # Linux: kB


def _faults() -> int:
    return resource.getrusage(resource.RUSAGE_SELF).ru_minflt


def worker_reference(path: str) -> dict:
    """A plain read of the file plus one 8th-order sosfilt pass, and one multiply pass."""
    import numpy as np
    import soundfile as sf
    from scipy import signal as sps

    sos = sps.butter(8, 0.25, output="sos")
    x, _ = sf.read(path)                          # warms the page cache and the libraries
    del x
    t0 = time.perf_counter()
    x, _ = sf.read(path)
    t_read = time.perf_counter() - t0
    t0 = time.perf_counter()
    y = sps.sosfilt(sos, x)
    t_iir = time.perf_counter() - t0
    t0 = time.perf_counter()
    np.multiply(x, 2.0, out=y)
    t_pass = time.perf_counter() - t0
    return {"read_s": t_read, "iir_s": t_iir, "ref_s": t_read + t_iir, "pass_s": t_pass, "n": int(x.size),
            "rss_mb": _rss_mb()}


class _Seen:
    """What the count of good reads needs of a read."""

    __slots__ = ("valid", "text")

    def __init__(self, valid: bool, text: str | None) -> None:
        self.valid, self.text = valid, text

    @property
    def frame(self):
        return self


def _decode(path: str) -> list:
    """The reads of ``path``: streamed (:func:`readchan.stream.decode_file`), or with
    ``BENCH_API=whole`` loaded whole and decoded (``load_capture`` + ``decode_capture``)."""
    api = os.environ.get("BENCH_API", "stream")
    if api == "stream":
        from readchan.stream import decode_file

        return decode_file(path)
    if api == "iter":                            # each read looked at and dropped, as a JSON Lines writer does
        from readchan.stream import iter_reads

        return [_Seen(r.valid, r.frame.text if r.frame else None) for r in iter_reads(path)]
    from readchan.channel import decode_capture
    from readchan.io.capture import load_capture

    return [r for res in decode_capture(load_capture(path)) for r in res.reads]


def worker_count(path: str) -> dict:
    """One decode with numpy's huge pages off, counting the fresh 4 kB pages it writes."""
    import numpy as np

    from readchan.channel import decode_capture  # noqa: F401

    np._core.multiarray._set_madvise_hugepage(False)
    f0 = _faults()
    _decode(path)
    return {"fresh_bytes": (_faults() - f0) * resource.getpagesize()}


def worker_decode(path: str) -> dict:
    """Cold (first) and warm (second) decode of ``path`` in this fresh process."""
    import readchan.channel  # noqa: F401  (imports are not part of the decode)
    import readchan.io.capture  # noqa: F401
    import readchan.stream  # noqa: F401

    t0 = time.perf_counter()
    reads = _decode(path)
    cold = time.perf_counter() - t0
    rss_cold = _rss_mb()
    del reads                                    # else the warm decode's peak holds both result lists
    t0 = time.perf_counter()
    reads = _decode(path)
    warm = time.perf_counter() - t0
    good = sum(1 for r in reads if r.valid and r.frame.text == T1)
    return {"cold_s": cold, "warm_s": warm, "rss_mb": _rss_mb(), "rss_cold_mb": rss_cold,
            "reads": len(reads), "good": good}


def _run_worker(kind: str, path: Path, env: dict) -> dict:
    out = subprocess.run([sys.executable, __file__, "--worker", kind, str(path)], cwd=ROOT, env=env,
                         capture_output=True, text=True)
    if out.returncode != 0:
        raise SystemExit(f"{kind} worker failed on {path.name}:\n{out.stderr.strip()[-2000:]}")
    return json.loads(out.stdout.strip().splitlines()[-1])


# -- the driver --------------------------------------------------------------------------------

def _load() -> str:
    return " ".join(Path("/proc/loadavg").read_text().split()[:3])


def measure(name: str, path: Path, n: int, swipes: int, repeat: int, env: dict, cache_root: Path | None) -> dict:
    refs, decs = [], []
    for i in range(repeat):                      # side by side: reference, then decode, each fresh
        refs.append(_run_worker("reference", path, env))
        if cache_root is not None:               # an empty compilation cache for every decode
            env = dict(env, NUMBA_CACHE_DIR=str(cache_root / f"{name}-{i}"))
        decs.append(_run_worker("decode", path, env))
    fresh = _run_worker("count", path, env)["fresh_bytes"]
    med = lambda rows, key: statistics.median(r[key] for r in rows)   # noqa: E731
    ref, cold, warm = med(refs, "ref_s"), med(decs, "cold_s"), med(decs, "warm_s")
    return {"capture": name, "samples": n, "seconds": n / RATE_HZ, "swipes": swipes,
            "reads": decs[0]["reads"], "good": decs[0]["good"],
            "read_s": med(refs, "read_s"), "iir_s": med(refs, "iir_s"), "ref_s": ref,
            "ref_rss_mb": med(refs, "rss_mb"), "cold_s": cold, "warm_s": warm,
            "msps_warm": n / warm / 1e6, "msps_cold": n / cold / 1e6,
            "ratio_warm": warm / ref, "ratio_cold": cold / ref,
            "rss_mb": max(r["rss_mb"] for r in decs), "rss_cold_mb": med(decs, "rss_cold_mb"), "rss_mb_median": med(decs, "rss_mb"),
            "fresh_arrays": fresh / (8.0 * n), "time_passes": warm / med(refs, "pass_s"),
            "cold_all": [round(r["cold_s"], 3) for r in decs], "warm_all": [round(r["warm_s"], 3) for r in decs],
            "ref_all": [round(r["ref_s"], 3) for r in refs]}


def report(row: dict) -> None:
    print(f"{row['capture']}: {row['samples']:,} samples ({row['seconds'] / 60:.1f} min), {row['swipes']} swipes; "
          f"{row['reads']} reads, {row['good']} valid with the right text")
    print(f"  reference (read {row['read_s']:.3f} s + sosfilt {row['iir_s']:.3f} s): {row['ref_s']:.3f} s, "
          f"RSS {row['ref_rss_mb']:.0f} MB")
    print(f"  decode warm {row['warm_s']:.3f} s = {row['msps_warm']:.1f} M samples/s, ratio {row['ratio_warm']:.2f}; "
          f"cold {row['cold_s']:.3f} s = {row['msps_cold']:.1f} M samples/s, ratio {row['ratio_cold']:.2f}")
    print(f"  peak RSS {row['rss_mb']:.0f} MB (median {row['rss_mb_median']:.0f}; after the first decode "
          f"{row['rss_cold_mb']:.0f}); fresh memory "
          f"{row['fresh_arrays']:.1f} full-length float64 arrays; time {row['time_passes']:.0f} full-length passes")
    print(f"  runs (s): cold {row['cold_all']}, warm {row['warm_all']}, reference {row['ref_all']}")


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--minutes", type=float, default=10.0, help="length of the three captures (default 10)")
    ap.add_argument("--long-minutes", type=float, default=120.0, help="length of the --long capture (default 120)")
    ap.add_argument("--repeat", type=int, default=5, help="fresh processes per capture (median; default 5)")
    ap.add_argument("--long", action="store_true", help="also the two-hour idle capture")
    ap.add_argument("--only", default="", help="comma-separated captures to run (idle, bench, continuous, long)")
    ap.add_argument("--fresh-cache", action="store_true",
                    help="an empty numba cache directory for every decode, so the cold decode includes compilation")
    ap.add_argument("--api", choices=("stream", "iter", "whole"), default="stream",
                    help="stream: readchan.stream.decode_file, every read kept (default); iter: readchan.stream."
                         "iter_reads, each read dropped once counted; whole: load_capture + decode_capture")
    ap.add_argument("--json", type=Path, default=None, help="also write the figures to this JSON file")
    ap.add_argument("--worker", nargs=2, metavar=("KIND", "PATH"), help=argparse.SUPPRESS)
    args = ap.parse_args()
    if args.worker:
        kind, path = args.worker
        workers = {"reference": worker_reference, "decode": worker_decode, "count": worker_count}
        print(json.dumps(workers[kind](path)))
        return
    if args.repeat < 1 or args.minutes <= 0 or args.long_minutes <= 0:
        raise SystemExit("--repeat must be at least 1 and the lengths positive")
    names = ["idle", "bench", "continuous"] + (["long"] if args.long else [])
    if args.only:
        names = [n for n in names + ["long"] if n in args.only.split(",")]
    env = dict(os.environ)
    for var in THREAD_VARS:
        env.setdefault(var, "1")
    env["PYTHONPATH"] = str(ROOT) + os.pathsep + env.get("PYTHONPATH", "")
    env["BENCH_API"] = args.api
    print(f"decode: {args.api}; threads: OMP_NUM_THREADS={env['OMP_NUM_THREADS']}; load before: {_load()}")
    rows = []
    with tempfile.TemporaryDirectory() as tmp:
        cache_root = Path(tmp) / "numba-cache" if args.fresh_cache else None
        for name in dict.fromkeys(names):
            path = Path(tmp) / f"{name}.wav"
            minutes = args.long_minutes if name == "long" else args.minutes
            n, swipes = build(path, GAPS_S[name], minutes * 60.0)
            row = measure(name, path, n, swipes, args.repeat, env, cache_root)
            report(row)
            rows.append(row)
            path.unlink()
    print(f"load after: {_load()}")
    if args.json:
        args.json.write_text(json.dumps({"load": _load(), "rows": rows}, indent=1))


if __name__ == "__main__":
    main()
