"""Accuracy of the tape diagnostics (readchan/measure/tape.py) on synthesized captures.

For each scenario (timecode on a line output or a raw head, steady, shuttling or spinning up;
cassette data at 300 and 1200 baud, off speed with wow), SNR and seed, the capture is
synthesized with a dropout, decoded with no format given and measured; the script prints per
scenario the worst and median |SNR error| (dB), the worst |speed error| of the trace against the
drawn profile (%), and the worst dropout edge error (ms) and depth error (dB).

    PYTHONPATH=. python scripts/bench_tape_inspect.py [--seeds 3]
"""

from __future__ import annotations

import argparse

import numpy as np

from readchan.channel import decode_capture
from readchan.io.capture import Capture
from readchan.measure.tape import measure_tape
from readchan.synth.kcs import KcsSpec, synthesize_kcs
from readchan.synth.ltc import LtcSpec, synthesize_ltc
from readchan.synth.playback import Playback, PlaySpeed

DROP = (0.6, 0.03, 15.0)
"""The dropout put in every capture: start s, duration s, depth dB."""
SCENARIOS = {
    "ltc line 1x": ("ltc", PlaySpeed(), dict(duration_s=1.5)),
    "ltc line shuttle 1-4x": ("ltc", PlaySpeed.shuttle(1, 4, 0.4, 0.3, at_s=0.2), dict(duration_s=1.5, rate_hz=96_000)),
    "ltc line 0.3x, AC 20 Hz": ("ltc", PlaySpeed.constant(0.3), dict(duration_s=3.0, highpass_hz=20.0)),
    "ltc head 1x": ("ltc", PlaySpeed(), dict(duration_s=1.5, signal="head", rate_hz=96_000)),
    "ltc head spin-up 0.2-1x": ("ltc", PlaySpeed.ramp(0.2, 1.0, 0.8, at_s=0.3), dict(duration_s=2.0, signal="head")),
    "kcs 300 baud 0.93x flutter": ("kcs", PlaySpeed.constant(0.93, flutter_depth=0.005, flutter_hz=6),
                                   dict(data=bytes(range(60)))),
    "kcs 1200 baud 1.1x wow": ("kcs", PlaySpeed.constant(1.1, wow_depth=0.01), dict(data=bytes(range(200)), baud=1200)),
}


def one(fmt: str, speed: PlaySpeed, kw: dict, snr_db: float, seed: int) -> dict | None:
    """The errors of one capture's measurements, or None when it gave no read."""
    kw = dict(kw)
    pb = Playback(snr_db=snr_db, dropouts=(DROP,), highpass_hz=kw.pop("highpass_hz", None))
    spec = (LtcSpec if fmt == "ltc" else KcsSpec)(speed=speed, playback=pb, seed=seed, **kw)
    s = synthesize_ltc(spec) if fmt == "ltc" else synthesize_kcs(spec)
    cap = Capture(s.samples, s.rate_hz, source="<synth>", units="FS")
    res = decode_capture(cap)[0]
    if not res.reads:
        return None
    rep = measure_tape(res.reads[0], s.samples, s.rate_hz)
    basis = 1.0
    if fmt == "ltc":          # speeds are relative to the rate the read justifies, or its first candidate
        p = res.reads[0].payload
        basis = spec.rate_fps / (p.rate_fps if p.rate_fps is not None else p.rate_fps_candidates[0])
    d = [x for x in rep.dropouts if abs(x.start_s - DROP[0]) < 0.01]
    return {"snr": rep.snr_db - snr_db if rep.snr_db is not None else np.nan,
            "speed": float(np.max(np.abs(rep.speed / (basis * speed.speed(rep.speed_t_s)) - 1))),
            "edge": max(abs(d[0].start_s - DROP[0]), abs(d[0].end_s - DROP[0] - DROP[1])) if d else np.nan,
            "depth": d[0].depth_db - DROP[2] if d else np.nan}


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--seeds", type=int, default=3)
    args = ap.parse_args()
    print(f"{'scenario':28s} {'n':>3s} {'|dSNR| max/med dB':>18s} {'|dv| max %':>10s} {'edge ms':>8s} "
          f"{'depth dB':>9s}")
    for name, (fmt, speed, kw) in SCENARIOS.items():
        rows = [r for snr in (18.0, 24.0, 30.0) for seed in range(args.seeds)
                if (r := one(fmt, speed, kw, snr, seed)) is not None]
        a = {k: np.array([r[k] for r in rows]) for k in ("snr", "speed", "edge", "depth")}
        print(f"{name:28s} {len(rows):3d} {np.nanmax(np.abs(a['snr'])):8.2f}/{np.nanmedian(np.abs(a['snr'])):<9.2f} "
              f"{100 * np.nanmax(a['speed']):10.2f} {1e3 * np.nanmax(a['edge']):8.2f} "
              f"{np.nanmax(np.abs(a['depth'])):9.2f}")


if __name__ == "__main__":
    main()
