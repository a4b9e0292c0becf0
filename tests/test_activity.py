"""The activity gate (:mod:`readchan.frontend.activity`): its spans cover every swipe the
synthesizer placed and every read whole-file decoding finds, and leave out plainly idle time.

References: the synthesizer's ground truth (``SynthResult.transition_times_s``, every flux
transition it recorded) and :func:`readchan.channel.decode_capture` on the whole capture."""

from __future__ import annotations

import numpy as np
import pytest

from readchan.channel import decode_capture
from readchan.frontend.activity import GUARD_S, Activity, active_spans
from readchan.io.capture import Capture
from readchan.synth import Impairments, SpeedProfile, SynthSpec, synthesize
from readchan.synth.card import track_content

T1 = "%B9912345678901239^QUILL/ODESSA M^2912101000000000000?"   # invented card
T2 = ";9912345678901239=29121010000000000000?"

CASES = [  # (track, speed cm/s, SNR dB, hum level, gap s)
    (1, 40.0, 30.0, 0.05, 1.5),
    (1, 120.0, 18.0, 0.0, 1.0),
    (2, 12.0, 20.0, 0.2, 2.0),
    (2, 60.0, 10.0, 0.0, 1.0),
    (1, 20.0, 40.0, 0.35, 0.3),
]


def _capture(track, speed, snr, hum, gap, seed=4):
    text = T1 if track == 1 else T2
    spec = SynthSpec(tracks=(track_content(text, track=track),), speed=SpeedProfile(speed, "swipe", 0.3),
                     swipes=3, gap_s=gap, lead_s=gap,
                     impairments=Impairments(snr_db=snr, jitter=0.03, hum_level=hum, dc_offset=0.05), seed=seed)
    return synthesize(spec)


def _inside(a_s, b_s, spans, rate):
    return any(lo / rate <= a_s and b_s <= hi / rate for lo, hi in spans)


@pytest.mark.parametrize("case", CASES)
def test_spans_cover_every_synthesized_transition(case):
    res = _capture(*case)
    spans = active_spans(res.samples[:, 0], res.rate_hz)
    t = res.transition_times_s[0]
    covered = np.zeros(t.size, bool)
    for lo, hi in spans:
        covered |= (t >= lo / res.rate_hz) & (t <= hi / res.rate_hz)
    assert covered.all(), t[~covered][:5]


@pytest.mark.parametrize("case", CASES)
def test_the_gate_never_drops_a_read_whole_file_decoding_finds(case):
    res = _capture(*case)
    spans = active_spans(res.samples[:, 0], res.rate_hz)
    reads = decode_capture(Capture(res.samples, res.rate_hz))[0].reads
    assert reads or case[2] <= 10
    for r in reads:
        assert _inside(r.segment.start_s, r.segment.end_s, spans, res.rate_hz)


def test_idle_time_between_distant_swipes_is_left_out():
    res = _capture(1, 40.0, 30.0, 0.05, 2.0)
    spans = active_spans(res.samples[:, 0], res.rate_hz)
    assert len(spans) == 3
    active_s = sum(b - a for a, b in spans) / res.rate_hz
    swipes_s = sum(b - a for a, b in res.swipe_windows_s)      # the card passing the head
    assert active_s <= swipes_s + 3 * (2 * GUARD_S + 0.01)


def test_a_capture_that_is_all_signal_is_one_span():
    res = _capture(1, 40.0, 30.0, 0.0, 0.0)
    x = res.samples[:, 0]
    assert active_spans(x, res.rate_hz) == [(0, x.size)]


def test_fed_in_chunks_the_gate_gives_the_same_energies_and_spans():
    res = _capture(2, 12.0, 20.0, 0.2, 2.0)
    x = res.samples[:, 0]
    gate = Activity(res.rate_hz)
    for a in range(0, x.size, 3001):
        gate.feed(x[a:a + 3001])
    whole = Activity(res.rate_hz)
    whole.feed(x)
    assert np.allclose(gate.energies(), whole.energies(), rtol=1e-12, atol=0)
    assert gate.spans() == whole.spans()


def test_silence_has_no_span_and_constant_samples_none_either():
    assert active_spans(np.zeros(48_000), 48_000.0) == []
    assert active_spans(np.full(48_000, 0.3), 48_000.0) == []


def test_a_capture_at_one_level_throughout_is_one_span():
    # a tape track from end to end (or noise only): no block stands out, nothing may be left out
    rng = np.random.default_rng(4)
    gate = Activity(48_000.0)
    gate.feed(rng.normal(0, 0.1, 480_000))
    assert gate.spans() == [(0, 480_000)]


def test_a_capture_quiet_for_less_than_a_fifth_is_one_span():
    # 10 % quiet lead, then signal: the 20th-percentile floor is the signal's own level
    rng = np.random.default_rng(5)
    x = np.concatenate((rng.normal(0, 0.001, 48_000), rng.normal(0, 0.1, 432_000)))
    gate = Activity(48_000.0)
    gate.feed(x)
    assert gate.spans() == [(0, x.size)]
