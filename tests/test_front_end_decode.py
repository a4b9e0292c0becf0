"""Decoding captures that went through a reader's analog front end (causal preamp, AC coupling,
quantisation): the detector must not take the preamp's ringing lobes for pulses."""

from __future__ import annotations

import numpy as np
import pytest
from scipy import signal as sps

from readchan.io.capture import Capture
from readchan.frontend.detect import detect_head
from readchan.synth import Impairments, SpeedProfile, SynthSpec, synthesize
from readchan.synth.card import track_content
from readchan.synth.head import KarlqvistPulse

from conftest import decode_reads

RATE_HZ = 48_000.0


def _reproduction(seed: int, filtered: bool = True):
    """Track 2, 20 random digits, 62 cm/s, 48 kHz, Karlqvist head g = 14.5 µm, d = 2.15 µm,
    a = 12.4 µm, SNR 38 dB; then a causal 2nd-order Butterworth at 7.9 kHz (2.2 × the highest
    pulse rate, 3.66 kHz) run over the samples with ``scipy.signal.sosfilt``.
    (The same captures as scripts/repro_causal_preamp.py.)"""
    rng = np.random.default_rng(seed)
    text = ";" + "".join(rng.choice(list("0123456789"), 20)) + "?"
    spec = SynthSpec(tracks=(track_content(text, track=2),), speed=SpeedProfile(62.0), rate_hz=RATE_HZ,
                     pulse=KarlqvistPulse(14.5e-6, 2.15e-6, 12.4e-6), impairments=Impairments(snr_db=38.0),
                     seed=seed)
    x = synthesize(spec).samples
    if filtered:
        x = sps.sosfilt(sps.butter(2, 7900.0, "low", fs=RATE_HZ, output="sos"), x, axis=0)
    return Capture(x, RATE_HZ, source="<repro>", units="FS"), text


@pytest.mark.parametrize("seed", range(20))
def test_track_2_through_a_causal_2nd_order_preamp_at_2_2x_the_pulse_rate_decodes(seed):
    cap, text = _reproduction(seed)
    reads = decode_reads(cap, field_check=False)  # random content: no 7813 layout
    assert [(r.frame.text, r.valid) for r in reads] == [(text, True)]


def _pulses_with_ringing(n_lobes: int):
    """Alternating pulses 40 samples apart, each followed by ``n_lobes`` alternating ringing lobes
    of 6 % of the pulse (first lobe of the opposite sign: the overshoot of a causal low-pass)."""
    n_pulses, spacing = 60, 40
    t = np.arange(n_pulses * spacing + 400, dtype=float)
    x = np.zeros_like(t)
    centres = 200 + spacing * np.arange(n_pulses)
    for k, c in enumerate(centres):
        s = 1.0 if k % 2 == 0 else -1.0
        x += s * np.exp(-0.5 * ((t - c) / 2.0) ** 2)
        for j in range(n_lobes):
            at = c + (j + 1) * spacing / (n_lobes + 1)
            x += s * (-1) ** (j + 1) * 0.06 * np.exp(-0.5 * ((t - at) / 2.0) ** 2)
    x += np.random.default_rng(0).normal(0, 0.002, t.size)
    return x, centres


@pytest.mark.parametrize("n_lobes", [1, 3, 4])
def test_ringing_lobes_between_pulses_are_not_detected_however_many_there_are(n_lobes):
    # With three or more small lobes per pulse the lobes outnumber the pulses, and an envelope
    # taken as a percentile over neighbouring candidates would fall to the lobes' level.
    x, centres = _pulses_with_ringing(n_lobes)
    tr = detect_head(x, RATE_HZ)
    assert np.array_equal(tr.index, centres)
    assert np.all(tr.flags == 0)


def test_quantisation_step_is_found_on_a_scope_grid_and_not_on_float_samples():
    from readchan.frontend.detect import quantisation_step
    from readchan.synth.chain import FrontEnd, quantise

    rng = np.random.default_rng(3)
    x = rng.normal(0, 0.2, 50_000)
    fe = FrontEnd(scope_volts_per_div=0.1, scope_offset_v=0.013)
    assert quantisation_step(quantise(x, fe)) == pytest.approx(0.1 * 8 / 256)   # V/div × 8 / 256
    assert quantisation_step(x) == 0.0


def test_noise_finer_than_a_quantisation_step_gives_no_transitions():
    # Gaussian noise of 0.4 step RMS, band-limited to 1.5 kHz as a preamp leaves it, quantised:
    # mostly zeros with sparse clumps of one-level toggles, which leave most 1 ms blocks empty.
    # The noise is then at least step/√12 (Widrow & Kollár 2008) and one level is never a pulse.
    from readchan.synth.chain import FrontEnd, quantise

    fe = FrontEnd(scope_volts_per_div=1.6)       # step 0.05: the pulse peak (1) spans 20 levels
    x, centres = _pulses_with_ringing(0)
    n = sps.sosfilt(sps.butter(2, 1500.0, fs=RATE_HZ, output="sos"), np.random.default_rng(4).normal(0, 1, 20_000))
    quiet = quantise(0.4 * fe.step * n / np.std(n), fe)
    y = quantise(x, fe)
    capture = np.concatenate((quiet, y, quiet))
    tr = detect_head(capture, RATE_HZ, quant_step=fe.step)
    assert np.array_equal(tr.index, centres + quiet.size)


def test_clipping_on_one_rail_only_is_recognised():
    # A baseline offset ahead of the clipper brings one polarity to its rail alone.
    from readchan.frontend.detect import clipped_fraction

    x, _ = _pulses_with_ringing(0)
    assert clipped_fraction(x) < 0.005
    assert clipped_fraction(np.maximum(x - 0.5, -0.7)) > 0.005


def test_a_flat_crest_is_timed_at_its_middle_even_when_its_extreme_sample_is_at_one_end():
    from readchan.frontend.detect import level_midpoint_times

    t = np.arange(200, dtype=float)
    x = np.exp(-0.5 * ((t - 100) / 6.0) ** 2) - np.exp(-0.5 * ((t - 80) / 3.0) ** 2) \
        - np.exp(-0.5 * ((t - 120) / 3.0) ** 2)
    crest = x >= 0.3                              # samples 92..108, clipped flat
    x = np.minimum(x, 0.3)
    x[crest] += np.linspace(0, 1e-4, crest.sum())  # the crest's largest sample is its last one
    idx = np.array([80, int(np.flatnonzero(crest)[-1]), 120])
    assert level_midpoint_times(x, idx)[1] == pytest.approx(100.0, abs=0.2)
