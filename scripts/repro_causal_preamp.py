"""Track 2 captures through a causal 2nd-order Butterworth preamp low-pass: how many decode.

The reproduction: track 2 text of 20 random digits, constant 62 cm/s, 48 kHz, Karlqvist head
(gap 14.5 µm, spacing 2.15 µm, transition parameter 12.4 µm), SNR 38 dB, seeds 0–19; then
``scipy.signal.sosfilt`` with ``butter(2, 7900, 'low', fs=48000, output='sos')`` on the samples.

    python scripts/repro_causal_preamp.py [--seeds 20] [--corner-hz 7900] [--order 2]
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

import numpy as np
from scipy import signal as sps

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from readchan.io.capture import Capture  # noqa: E402
from readchan.channel import DecodeSettings, decode_capture  # noqa: E402
from readchan.report.render import reads_of  # noqa: E402
from readchan.synth import Impairments, SpeedProfile, SynthSpec, synthesize  # noqa: E402
from readchan.synth.card import track_content  # noqa: E402
from readchan.synth.head import KarlqvistPulse  # noqa: E402


def capture(seed: int, corner_hz: float | None = 7900.0, order: int = 2):
    """The reproduction's capture for ``seed`` (corner None: without the filter); (Capture, text)."""
    rng = np.random.default_rng(seed)
    text = ";" + "".join(rng.choice(list("0123456789"), 20)) + "?"
    spec = SynthSpec(tracks=(track_content(text, track=2),), speed=SpeedProfile(62.0), rate_hz=48_000.0,
                     pulse=KarlqvistPulse(14.5e-6, 2.15e-6, 12.4e-6), impairments=Impairments(snr_db=38.0),
                     seed=seed)
    x = synthesize(spec).samples
    if corner_hz is not None:
        x = sps.sosfilt(sps.butter(order, corner_hz, "low", fs=48_000.0, output="sos"), x, axis=0)
    return Capture(x, 48_000.0, source=f"seed {seed}", units="FS"), text


def outcome(cap: Capture, text: str) -> str:
    # random digits hold no ISO/IEC 7813 layout (no field separator): the field check is off
    reads = reads_of(decode_capture(cap, DecodeSettings(field_check=False)))
    if not reads:
        return "no framed data"
    if any(r.valid and r.frame.text == text for r in reads):
        return "ok"
    return "wrong: " + " | ".join(r.frame.text for r in reads)


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--seeds", type=int, default=20)
    ap.add_argument("--corner-hz", type=float, default=7900.0)
    ap.add_argument("--order", type=int, default=2)
    a = ap.parse_args()
    for label, corner in (("without the filter", None), (f"with butter({a.order}, {a.corner_hz:g})", a.corner_hz)):
        res = [outcome(*capture(s, corner, a.order)) for s in range(a.seeds)]
        ok = sum(r == "ok" for r in res)
        print(f"{label}: {ok} of {a.seeds} decode")
        for s, r in enumerate(res):
            if r != "ok":
                print(f"  seed {s}: {r}")


if __name__ == "__main__":
    main()
