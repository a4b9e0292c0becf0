"""A decoder must never call noise data: no valid read from noise, hum or stray pulses.

A false accept (a valid verdict on wrong data) is the worst failure a decoder can make, so
this sample is larger than the others: 60 captures of noise, hum and randomly placed pulses
of random polarity, at several rates and levels.
"""

from __future__ import annotations

import numpy as np
import pytest

from readchan.channel import decode_channel
from readchan.synth.head import LorentzianPulse

RATES = (44_100.0, 48_000.0, 96_000.0, 192_000.0)


def _noise_capture(kind: str, seed: int) -> tuple[np.ndarray, float]:
    rng = np.random.default_rng(seed)
    rate = RATES[seed % len(RATES)]
    n = int(rate * rng.uniform(0.3, 1.0))
    t = np.arange(n) / rate
    x = rng.normal(0.0, rng.uniform(0.001, 0.2), n)
    if kind in ("hum", "mixed"):
        f = rng.choice([50.0, 60.0])
        x += rng.uniform(0.05, 0.5) * np.sin(2 * np.pi * f * t + rng.uniform(0, 6.3))
        x += rng.uniform(0.0, 0.1) * np.sin(2 * np.pi * 3 * f * t)
    if kind in ("pulses", "mixed"):
        pulse = LorentzianPulse(1e-3)                  # a PW50 of 1 mm, swept past at 1 mm per width_s
        width_s = rng.uniform(30e-6, 600e-6)
        for _ in range(int(rng.integers(20, 600))):
            t0 = rng.uniform(0, t[-1])
            x += rng.choice([-1.0, 1.0]) * rng.uniform(0.1, 0.8) * pulse.shape((t - t0) / width_s * 1e-3)
    return x, rate


@pytest.mark.parametrize("seed", range(60))
def test_noise_hum_and_stray_pulses_never_give_a_valid_read(seed):
    kind = ("noise", "hum", "pulses", "mixed")[seed % 4]
    x, rate = _noise_capture(kind, seed)
    result = decode_channel(x, rate)
    assert not any(r.valid for r in result.reads), [r.frame.text for r in result.reads]


def test_stray_pulses_as_narrow_as_the_sampling_do_not_break_the_band_limits():
    # seed 186: single-sample-wide pulses at 96 kHz once put the auto low-pass at Nyquist
    x, rate = _noise_capture("pulses", 186)
    result = decode_channel(x, rate)
    assert not any(r.valid for r in result.reads)
