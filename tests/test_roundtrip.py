"""Round trip: synthesize known content with known impairments, decode, get the same text back.

Targets of the read-channel core: any valid content for each ISO/IEC 7811 track format, either
direction, speed varying by up to ±30 % along the swipe, jitter up to ±5 % of a cell, SNR of
25 dB or more, sample rates 44.1–192 kHz; both head-voltage and logic-level (flux) captures.
And through a reader's front end (:mod:`readchan.synth.chain`): every capture that decodes
without the chain decodes with it, and nothing decodes to a wrong text that passes its checks.
"""

from __future__ import annotations

from hypothesis import example, given, settings
from hypothesis import strategies as st

from readchan.formats.iso7811.charset import TRACKS
from readchan.synth import FrontEnd, Impairments, SpeedProfile

from conftest import PROFILE, decode_reads, synth_capture

RATES = [44_100.0, 48_000.0, 96_000.0, 192_000.0]


@st.composite
def track_text(draw, track: int):
    """Valid data for an ISO track: the format's character set minus the sentinels."""
    spec = TRACKS[track]
    fmt = spec.fmt
    sentinels = {fmt.start_code, fmt.end_code}
    alphabet = [chr(c + fmt.offset) for c in range(2 ** fmt.data_bits) if c not in sentinels]
    n = draw(st.integers(1, spec.max_chars - 3))
    body = draw(st.text(alphabet=alphabet, min_size=n, max_size=n))
    return fmt.start_char + body + fmt.end_char


@st.composite
def scenario(draw):
    track = draw(st.sampled_from([1, 2, 3]))
    text = draw(track_text(track))
    rate = draw(st.sampled_from(RATES))
    variation = draw(st.floats(0.0, 0.3))
    density = TRACKS[track].density_bpi
    # keep at least 10 samples per bit cell at the fastest point of the swipe
    v_max = min(100.0, rate * 2.54 / (density * 10) / (1 + variation))
    speed = draw(st.floats(10.0, v_max))
    profile = draw(st.sampled_from(["constant", "ramp", "swipe"]))
    if profile == "ramp" and draw(st.booleans()):
        variation = -variation
    imp = Impairments(jitter=draw(st.floats(0.0, 0.05)), snr_db=draw(st.floats(25.0, 60.0)),
                      reverse=draw(st.booleans()), invert=draw(st.booleans()))
    return track, text, rate, SpeedProfile(speed, profile, variation), imp, draw(st.integers(0, 2**31))


@st.composite
def front_end(draw, highest_pulse_rate_hz: float, rate_hz: float, peak: float):
    """A reader's front end: AC coupling 5–50 Hz; a causal preamp low-pass of order 1–4, either
    family, its corner from 2× the highest pulse rate (1 / the shortest half cell at the fastest
    point of the swipe; a noise-minded design sets the band just above the signal) to 8×; a
    sound-card or a scope decimation; quantisation off, 16, 12 or 8 bits, or an 8-bit scope with
    the pulse peak at the mean speed spanning 0.7–3 divisions (about 18 of its
    levels on the peak at the coarsest)."""
    oversample = draw(st.sampled_from([4, 8]))
    corner = min(draw(st.floats(2.0, 8.0)) * highest_pulse_rate_hz, 0.35 * oversample * rate_hz)
    quant = draw(st.sampled_from(["none", "16", "12", "8", "scope"]))
    divisions = draw(st.sampled_from([8, 10]))
    return FrontEnd(ac_coupling_hz=draw(st.floats(5.0, 50.0)), preamp_lowpass_hz=corner,
                    preamp_order=draw(st.integers(1, 4)), preamp_family=draw(st.sampled_from(["butterworth", "bessel"])),
                    antialias=draw(st.booleans()),
                    quantize_bits=int(quant) if quant.isdigit() else None,
                    scope_volts_per_div=peak / draw(st.floats(0.7, 3.0)) if quant == "scope" else None,
                    scope_divisions=divisions, oversample=oversample)


@st.composite
def chain_scenario(draw):
    track, text, rate, speed, imp, seed = draw(scenario())
    v_max = speed.mean_cm_s * (1 + abs(speed.variation))
    highest_pulse_rate_hz = 2 * v_max / 2.54 * TRACKS[track].density_bpi
    # AMPLITUDE is the pulse peak at the mean speed; the preamp takes some of it
    fe = draw(front_end(highest_pulse_rate_hz, rate, peak=0.5))
    return track, text, rate, speed, imp, seed, fe


def _check(reads, text, reverse):
    assert len(reads) == 1, [r.frame.text for r in reads]
    r = reads[0]
    assert r.frame.text == text
    assert r.valid
    assert r.frame.direction == ("reverse" if reverse else "forward")


@given(scenario())
def test_head_capture_round_trips_to_the_same_text_valid_and_in_the_right_direction(sc):
    track, text, rate, speed, imp, seed = sc
    cap, _ = synth_capture({track: text}, rate_hz=rate, speed=speed, imp=imp, seed=seed)
    _check(decode_reads(cap, field_check=False), text, imp.reverse)  # random content: no 7813 layout


@given(scenario())
def test_logic_level_capture_round_trips_to_the_same_text(sc):
    track, text, rate, speed, imp, seed = sc
    imp = Impairments(jitter=imp.jitter, reverse=imp.reverse, invert=imp.invert)
    cap, _ = synth_capture({track: text}, rate_hz=rate, speed=speed, imp=imp, seed=seed, output="flux")
    _check(decode_reads(cap, field_check=False), text, imp.reverse)  # random content: no 7813 layout


@settings(max_examples=25 if PROFILE == "ci" else 200)
@given(chain_scenario())
# an 8-bit scope at 0.67 V/div: noise finer than a step reached the samples as sparse one-level
# toggles, the noise estimate fell to a fifth of the truth and the toggles became "pulses"
@example((2, ";0?", 44_100.0, SpeedProfile(14.0), Impairments(snr_db=25.0), 0,
          FrontEnd(ac_coupling_hz=5.0, preamp_lowpass_hz=1653.54, antialias=False, scope_volts_per_div=2 / 3,
                   oversample=4)))
def test_a_capture_that_decodes_without_the_front_end_decodes_through_it(sc):
    track, text, rate, speed, imp, seed, fe = sc
    bare, _ = synth_capture({track: text}, rate_hz=rate, speed=speed, imp=imp, seed=seed)
    bare_reads = decode_reads(bare)
    chained, _ = synth_capture({track: text}, rate_hz=rate, speed=speed, imp=imp, seed=seed, front_end=fe)
    reads = decode_reads(chained)
    # no false accept, with or without the chain: a valid read holds the recorded text
    assert all(r.frame.text == text for r in bare_reads + reads if r.valid)
    if len(bare_reads) == 1 and bare_reads[0].valid:
        _check(reads, text, imp.reverse)


def test_three_track_capture_decodes_each_channel_as_its_track(demo_texts):
    cap, _ = synth_capture(demo_texts, rate_hz=96_000.0, speed=SpeedProfile(40.0, "swipe", 0.2),
                           imp=Impairments(snr_db=30, jitter=0.03), seed=5)
    reads = decode_reads(cap)
    assert [r.channel for r in reads] == [0, 1, 2]
    assert [r.frame.text for r in reads] == [demo_texts[1], demo_texts[2], demo_texts[3]]
    assert [r.track.number for r in reads] == [1, 2, 3]
    assert all(r.valid for r in reads)


def test_mean_speed_is_recovered_from_the_bit_period_and_density(demo_texts):
    cap, _ = synth_capture({2: demo_texts[2]}, speed=SpeedProfile(45.0), seed=1)
    (r,) = decode_reads(cap)
    assert abs(r.mean_speed_cm_s - 45.0) / 45.0 < 0.02


def test_read_times_bracket_the_swipe(demo_texts):
    cap, res = synth_capture({1: demo_texts[1]}, seed=2)
    (r,) = decode_reads(cap)
    t0, t1 = res.swipe_windows_s[0]
    true = res.transition_times_s[0]
    assert abs(r.start_s - true[0]) < 1e-3 and abs(r.end_s - true[-1]) < 1e-3
    assert t0 <= r.start_s < r.end_s <= t1


def test_mains_hum_a_third_of_the_pulse_amplitude_is_notched_and_decoded(demo_texts):
    for hz in (50.0, 60.0):
        cap, _ = synth_capture({1: demo_texts[1]}, imp=Impairments(hum_hz=hz, hum_level=0.33, snr_db=30), seed=4)
        (r,) = decode_reads(cap)
        assert r.valid and r.frame.text == demo_texts[1]


def test_dc_offset_and_ac_coupling_do_not_stop_a_read(demo_texts):
    cap, _ = synth_capture({2: demo_texts[2]}, imp=Impairments(dc_offset=0.2, highpass_hz=5.0, snr_db=35), seed=6)
    (r,) = decode_reads(cap)
    assert r.valid and r.frame.text == demo_texts[2]
