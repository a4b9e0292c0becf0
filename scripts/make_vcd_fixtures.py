"""Make the VCD example captures in fixtures/ (invented card content, as fixtures/README.md says).

* ``track1-comparator.vcd``: a comparator's output on a synthesized track 1 flux waveform
  (magnetisation square wave, 30 cm/s), one wire ``reader.comp_out``, timescale 1 µs;
* ``track2-strobe.vcd``: a reader chip's strobe-and-data pair for track 2 (``reader.rcp``,
  ``reader.rdd``, both active low), 75 bpi at 25 cm/s (one bit per 1.355 ms), timescale 1 µs.

    python scripts/make_vcd_fixtures.py [--force]
"""

from __future__ import annotations

import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from readchan.io.vcd_write import write_comparator_vcd, write_strobe_vcd  # noqa: E402
from readchan.synth import SpeedProfile, SynthSpec, synthesize  # noqa: E402
from readchan.synth.card import track_content  # noqa: E402
from readchan.units import bit_cell_m  # noqa: E402

T1 = "%B9912345678901239^QUILL/ODESSA M^2912101000000000000?"
T2 = ";9912345678901239=29121010000000000?"


def main(force: bool = False) -> None:
    fx = ROOT / "fixtures"
    spec = SynthSpec(tracks=(track_content(T1, track=1),), speed=SpeedProfile(mean_cm_s=30.0), output="flux",
                     rate_hz=200_000.0, seed=2026)
    res = synthesize(spec)
    n = write_comparator_vcd(fx / "track1-comparator.vcd", res.samples[:, 0], res.rate_hz, force=force)
    tc = track_content(T2, track=2)
    period_s = bit_cell_m(tc.density_bpi) / 0.25          # the cell over the speed, 25 cm/s
    write_strobe_vcd(fx / "track2-strobe.vcd", tc.bits, period_s, force=force)
    print(f"track1-comparator.vcd: {n} edges; track2-strobe.vcd: {tc.bits.size} bits")


if __name__ == "__main__":
    main(force="--force" in sys.argv[1:])
