"""The front end's per-capture decisions (:class:`readchan.frontend.head.FrontEndDecisions`):
taken once from a capture's samples, they decode its stretches without being estimated again,
and give the reads the stretch gives on its own.  The reference is the decoder's own answer
without decisions (the card checks of ISO/IEC 7811-2 pass on both)."""

from __future__ import annotations

import numpy as np
import pytest

from readchan.channel import DecodeSettings, decode_channel, front_end_decisions
from readchan.errors import ParameterError
from readchan.frontend import head
from readchan.frontend.condition import fit_hum
from readchan.io.capture import load_capture

FIXTURE = "fixtures/track1-two-swipes.wav"


def _reads(res):
    return [(r.frame.text, r.valid, round(r.start_s, 4)) for r in res.reads]


def test_decisions_of_a_capture_decode_it_to_the_same_reads():
    cap = load_capture(FIXTURE)
    x = np.ascontiguousarray(cap.channel(0))
    d = front_end_decisions(x, cap.rate_hz)
    plain, decided = decode_channel(x, cap.rate_hz), decode_channel(x, cap.rate_hz, decisions=d)
    assert _reads(decided) == _reads(plain) and any(v for _, v, _ in _reads(plain))


def test_decisions_record_what_the_front_end_decided_on_the_capture():
    cap = load_capture(FIXTURE)
    x = np.ascontiguousarray(cap.channel(0))
    d = front_end_decisions(x, cap.rate_hz)
    rec = decode_channel(x, cap.rate_hz).front_end
    assert (d.rate_hz, d.quant_step, d.band_hz, d.lowpass_hz, d.highpass_hz) == \
        (cap.rate_hz, rec.quant_step, rec.band_hz, rec.lowpass_hz, rec.highpass_hz)
    assert d.noise_rms is not None and d.noise_rms > 0


def test_a_stretch_decoded_with_decisions_does_not_estimate_band_or_step_again(monkeypatch):
    cap = load_capture(FIXTURE)
    x = np.ascontiguousarray(cap.channel(0))
    d = front_end_decisions(x, cap.rate_hz)

    def refuse(*a, **k):
        raise AssertionError("estimated again")

    monkeypatch.setattr(head, "signal_band_hz", refuse)
    monkeypatch.setattr(head, "quantisation_step", refuse)
    monkeypatch.setattr(head, "pulse_width_s", refuse)
    assert decode_channel(x, cap.rate_hz, decisions=d).reads


def test_decisions_taken_at_another_rate_are_refused():
    cap = load_capture(FIXTURE)
    x = np.ascontiguousarray(cap.channel(0))
    d = head.FrontEndDecisions(rate_hz=cap.rate_hz / 2)
    with pytest.raises(ParameterError, match="Hz"):
        decode_channel(x, cap.rate_hz, DecodeSettings(format="iso-alpha"), decisions=d)


def test_hum_fitted_at_a_given_frequency_keeps_that_frequency_and_finds_the_amplitude():
    rate = 8000.0
    t = np.arange(int(2 * rate)) / rate
    rng = np.random.default_rng(0)
    x = 0.05 * np.sin(2 * np.pi * 50.0 * t + 0.3) + rng.normal(0, 0.001, t.size)
    fit = fit_hum(x, rate, np.ones(t.size, bool), freq_hz=50.0)
    assert fit is not None and fit.freq_hz == 50.0
    assert fit.amplitude == pytest.approx(0.05, rel=0.02)    # the sine's own amplitude


def test_a_capture_with_hum_decoded_with_its_decisions_refits_the_hum_at_their_frequency():
    from readchan.synth import Impairments, SpeedProfile, SynthSpec, synthesize
    from readchan.synth.card import track_content

    text = "%B9912345678901239^QUILL/ODESSA M^2912101000000000000?"      # invented card
    spec = SynthSpec(tracks=(track_content(text, track=1),), speed=SpeedProfile(40.0, "swipe", 0.3),
                     rate_hz=48_000.0, swipes=2, gap_s=0.25, lead_s=0.2,
                     impairments=Impairments(snr_db=30.0, hum_hz=50.0, hum_level=0.05), seed=3)
    x = synthesize(spec).samples[:, 0]
    d = front_end_decisions(x, 48_000.0)
    assert d.hum_hz is not None and abs(d.hum_hz - 50.0) < 0.6          # the hum synthesized
    res = decode_channel(x, 48_000.0, decisions=d)
    assert res.front_end.hum_hz == d.hum_hz and res.front_end.hum_fitted
    assert [r.frame.text for r in res.reads if r.valid] == [text, text]
