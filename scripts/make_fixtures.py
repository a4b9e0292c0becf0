"""Regenerate the shipped example captures in fixtures/ (all content invented).

Run: python scripts/make_fixtures.py [--force]
"""

from __future__ import annotations

import sys
from pathlib import Path

from readchan.io.write import write_capture
from readchan.synth import Impairments, SpeedProfile, SynthSpec, synthesize
from readchan.synth.card import track_content

HERE = Path(__file__).resolve().parent.parent / "fixtures"

# Invented test card: the name and account number are made up (the number passes Luhn).
T1 = "%B9912345678901239^QUILL/ODESSA M^2912101000000000000?"
T2 = ";9912345678901239=29121010000000000?"
T3 = ";011234567890123445=7247241000000000000303000000000000000000?"

FIXTURES = {
    # name: (tracks, speed, impairments, rate, kind, extra)
    "three-track-swipe.wav": ((1, 2, 3), SpeedProfile(35.0, "swipe", 0.25),
                              Impairments(snr_db=32.0, jitter=0.03, hum_hz=50.0, hum_level=0.05), 48_000, "wav16", {}),
    "track2-reverse-noisy.flac": ((2,), SpeedProfile(25.0, "ramp", 0.2),
                                  Impairments(snr_db=22.0, jitter=0.04, reverse=True), 44_100, "flac", {}),
    "track1-two-swipes.wav": ((1,), SpeedProfile(40.0, "swipe", 0.3),
                              Impairments(snr_db=28.0, jitter=0.03, invert=True), 96_000, "wav24", {"swipes": 2}),
    "track2-scope.csv": ((2,), SpeedProfile(20.0), Impairments(snr_db=30.0, dc_offset=0.05), 20_000, "csv", {}),
    "track1-comparator.wav": ((1,), SpeedProfile(30.0, "ramp", -0.25), Impairments(jitter=0.02), 48_000, "wav16",
                              {"output": "flux"}),
}


def main(force: bool) -> None:
    texts = {1: T1, 2: T2, 3: T3}
    HERE.mkdir(exist_ok=True)
    for name, (tracks, speed, imp, rate, kind, extra) in FIXTURES.items():
        spec = SynthSpec(tracks=tuple(track_content(texts[n], track=n) for n in tracks), speed=speed,
                         impairments=imp, rate_hz=rate, seed=2026, **extra)
        res = synthesize(spec)
        path = write_capture(HERE / name, res.samples, res.rate_hz, kind=kind, force=force,
                             channel_names=[f"track{n}" for n in tracks])
        print(f"{path.name}: {res.samples.shape[1]} ch, {res.duration_s:.3f} s, {path.stat().st_size} bytes")


if __name__ == "__main__":
    main("--force" in sys.argv)
