"""Benchmark: a long timecode capture decoded from its file in pieces (readchan.stream_tape).

Input: a capture length (default two hours) and a work directory.
Output: printed figures: load average; per run (each in a fresh process) the wall time and peak
RSS of the streamed timecode decode, and side by side the time of a plain soundfile read of the
same file plus one 8th-order Butterworth sosfilt over it (in blocks, so that it measures the
passes, not the paging); the medians of ``--runs`` runs.

The capture is synthesized (readchan.synth.ltc: 25 fps line-level timecode at 48 kHz, from the
invented start label 10:00:00:00) one minute at a time and written to a 16-bit mono WAV with
soundfile, so it is never whole in memory: each minute is exactly 1500 frames, and every LTC
frame starts at the same polarity (an even number of zeros per word, SMPTE ST 12-1), so the
minutes join into one continuous track.

    python scripts/bench_stream_tape.py --minutes 120 --runs 3
    python scripts/bench_stream_tape.py --format kcs --minutes 20 --runs 3

``--format kcs`` does the same for a cassette capture (1200 baud, invented random bytes, one
block a minute) decoded by readchan.stream_kcs.
"""

from __future__ import annotations

import argparse
import json
import os
import resource
import statistics
import subprocess
import sys
import time
from pathlib import Path

RATE_HZ = 48_000.0
FPS = 25.0


def write_ltc(path: Path, minutes: float, *, start: str = "10:00:00:00", piece_s: float = 60.0,
              rate_fps: float = FPS, direction: str = "forward", noise_db: float | None = None,
              lead_s: float = 0.0) -> None:
    """A ``minutes``-long line-level timecode capture written to ``path`` piece by piece: each
    piece ``piece_s`` of tape (a whole number of frames), labels continuing; ``lead_s`` of
    digital silence before it."""
    import numpy as np
    import soundfile as sf

    from readchan.formats.ltc.word import Label, count_to_label, label_to_count, labels_per_second
    from readchan.synth.ltc import LtcSpec, synthesize_ltc
    from readchan.synth.playback import Playback

    per_s = labels_per_second(rate_fps)
    frames_per_piece = round(piece_s * rate_fps)
    if abs(frames_per_piece - piece_s * rate_fps) > 1e-9:
        raise ValueError("a piece must hold a whole number of frames")
    count = label_to_count(Label.parse(start)[0], per_s)
    total_s = minutes * 60.0
    done = 0.0
    play = Playback(snr_db=noise_db) if noise_db is not None else Playback()
    with sf.SoundFile(str(path), "w", samplerate=int(RATE_HZ), channels=1, subtype="PCM_16") as out:
        if lead_s > 0:
            out.write(np.zeros(int(round(lead_s * RATE_HZ))))
        k = 0
        while done < total_s - 1e-9:
            dur = min(piece_s, total_s - done)
            spec = LtcSpec(start=count_to_label(count, per_s).text(), rate_fps=rate_fps, duration_s=dur,
                           start_cell=0.0, rate_hz=RATE_HZ, direction=direction, playback=play, seed=k)
            out.write(synthesize_ltc(spec).samples)
            count += frames_per_piece
            done += dur
            k += 1


def write_kcs(path: Path, minutes: float, *, block_s: float = 60.0, baud: int = 1200) -> None:
    """A ``minutes``-long cassette capture of invented random bytes, one block of about
    ``block_s`` (leader, bytes, trailer) written at a time."""
    import numpy as np
    import soundfile as sf

    from readchan.synth.kcs import KcsSpec, synthesize_kcs

    rng = np.random.default_rng(0)
    per_block = int((block_s - 0.5) * baud / 11)
    with sf.SoundFile(str(path), "w", samplerate=int(RATE_HZ), channels=1, subtype="PCM_16") as out:
        for k in range(max(1, round(minutes * 60.0 / block_s))):
            data = bytes(rng.integers(0, 256, per_block, dtype=np.uint8))
            x = synthesize_kcs(KcsSpec(data=data, baud=baud, leader_s=0.3, quiet_s=0.1, seed=k)).samples
            out.write(0.8 * x / np.max(np.abs(x)))


def _peak_rss_mb() -> float:
    """This process's peak resident set, MB: VmHWM (Linux; the ``ru_maxrss`` of a child keeps
    the parent's peak from before the exec, which here wrote the capture), else ``ru_maxrss``."""
    try:
        for line in Path("/proc/self/status").read_text().splitlines():
            if line.startswith("VmHWM:"):
                return int(line.split()[1]) / 1024.0
    except OSError:
        pass
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0


def _child(mode: str, path: str) -> dict:
    t0 = time.perf_counter()
    if mode == "kcs":
        from readchan.stream_kcs import stream_kcs

        read = stream_kcs(path, 0)
        extra = {"bytes": len(read.data), "framing_errors": len(read.framing_errors), "baud": read.baud}
    elif mode == "stream":
        from readchan.stream_tape import stream_ltc

        read, mismatches = stream_ltc(path, 0)
        extra = {"frames": len(read.frames), "events": len(read.events), "bits": len(read.bits),
                 "mismatches": mismatches, "valid": read.valid}
    else:
        import numpy as np
        import soundfile as sf
        from scipy import signal as sps

        sos = sps.butter(8, 2000.0, fs=RATE_HZ, output="sos")
        zi = np.zeros((sos.shape[0], 2))
        acc = 0.0
        for blk in sf.blocks(path, blocksize=1 << 20, dtype="float64"):
            y, zi = sps.sosfilt(sos, blk, zi=zi)
            acc += float(y[-1])
        extra = {"last": acc}
    return {"mode": mode, "seconds": time.perf_counter() - t0, "peak_rss_mb": _peak_rss_mb(), **extra}


def main(argv: list[str] | None = None) -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--minutes", type=float, default=120.0)
    ap.add_argument("--runs", type=int, default=3)
    ap.add_argument("--format", choices=("ltc", "kcs"), default="ltc")
    ap.add_argument("--dir", default="/tmp/bench_stream_tape")
    ap.add_argument("--child", nargs=2, metavar=("MODE", "PATH"), help=argparse.SUPPRESS)
    a = ap.parse_args(argv)
    if a.child:
        print(json.dumps(_child(*a.child)))
        return
    d = Path(a.dir)
    d.mkdir(parents=True, exist_ok=True)
    path = d / f"{a.format}_{a.minutes:g}min.wav"
    if not path.exists():
        t0 = time.perf_counter()
        (write_ltc if a.format == "ltc" else write_kcs)(path, a.minutes)
        print(f"wrote {path} ({path.stat().st_size / 1e6:.0f} MB) in {time.perf_counter() - t0:.0f} s")
    print(f"load average before: {os.getloadavg()}")
    rows: dict[str, list[dict]] = {"stream" if a.format == "ltc" else "kcs": [], "baseline": []}
    for _ in range(a.runs):
        for mode in rows:
            out = subprocess.run([sys.executable, __file__, "--child", mode, str(path)], check=True,
                                 capture_output=True, text=True, env={**os.environ, "OMP_NUM_THREADS": "1"})
            r = json.loads(out.stdout.strip().splitlines()[-1])
            rows[mode].append(r)
            print(json.dumps(r))
    s, b = rows["stream" if a.format == "ltc" else "kcs"], rows["baseline"]
    ts, tb = statistics.median(r["seconds"] for r in s), statistics.median(r["seconds"] for r in b)
    print(f"median streamed decode {ts:.1f} s, peak RSS {statistics.median(r['peak_rss_mb'] for r in s):.0f} MB; "
          f"baseline (soundfile read + 8th-order sosfilt) {tb:.1f} s, peak RSS "
          f"{statistics.median(r['peak_rss_mb'] for r in b):.0f} MB; ratio {ts / tb:.1f}×")
    print(f"load average after: {os.getloadavg()}")


if __name__ == "__main__":
    main()
