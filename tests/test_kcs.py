"""Kansas City standard decoding: a byte worked by hand, round trips through the synthesizer
under the impairments a cassette meets, baud detection, framing errors and the JSON contract.

Source of the format: BYTE, Feb. 1976 (../shared/REFERENCE.md): 300 baud, a 0 is four cycles
of 1200 Hz and a 1 eight cycles of 2400 Hz; a start bit (0), eight data bits LSB first, two
stop bits (1); idles at mark; the 1200-baud variant uses one and two cycles (medium confidence).
"""

from __future__ import annotations

import json

import numpy as np
import pytest

from readchan.errors import ParameterError
from readchan.formats.kcs.read import decode_kcs, kcs_json
from readchan.formats.kcs.read import kcs_bits
from readchan.synth.playback import Playback, PlaySpeed
from readchan.synth.kcs import KcsSpec, synthesize_kcs

RATE_HZ = 48_000.0
DATA = bytes(range(256))


def hand_tone(bits, baud=300, leader_s=0.2, rate_hz=RATE_HZ):
    """A tone built directly from the standard: per bit, whole cycles of 1200 Hz (0) or 2400 Hz (1),
    each bit starting at phase 0, after a leader of 2400 Hz; returns (samples, start-bit times)."""
    cycles = {300: (4, 8), 1200: (1, 2)}[baud]
    parts = [np.sin(2 * np.pi * 2400 * np.arange(int(leader_s * rate_hz)) / rate_hz)]
    bit_n = rate_hz / baud
    for b in bits:
        n = int(round(bit_n))
        t = np.arange(n) / rate_hz
        hz = 2400.0 if b else 1200.0
        assert cycles[b] == round(hz / baud)
        parts.append(np.sin(2 * np.pi * hz * t))
    parts.append(np.sin(2 * np.pi * 2400 * np.arange(int(0.02 * rate_hz)) / rate_hz))
    x = 0.5 * np.concatenate(parts)
    starts = leader_s + np.arange(0, len(bits), 11) / baud
    return x, starts


def test_byte_a_is_framed_as_worked_by_hand():
    # 'A' = 0x41 = 0100 0001; LSB first 1000 0010; with start 0 and stop 11: 0 10000010 11
    assert "".join(map(str, kcs_bits(b"A"))) == "01000001011"


def test_hand_built_byte_a_decodes_at_300_baud():
    # 11 bits: four 1s (16 half cycles each) and seven 0s (8 each) = 120 half cycles of data
    x, starts = hand_tone(kcs_bits(b"A"))
    r = decode_kcs(x, RATE_HZ)
    assert (r.data, r.baud, r.framing_errors, r.valid) == (b"A", 300, (), True)
    assert r.byte_times_s[0] == pytest.approx(starts[0], abs=1e-4)


def test_stop_bit_at_space_is_a_framing_error_with_its_index_and_time():
    bits = kcs_bits(b"\x55\x66\x77").copy()
    bits[11 + 10] = 0                       # the second byte's last stop bit
    x, starts = hand_tone(bits, baud=1200)
    r = decode_kcs(x, RATE_HZ)
    assert 1 in r.framing_errors and 0 not in r.framing_errors and not r.valid
    assert r.byte_times_s[1] == pytest.approx(starts[1], abs=1e-4)
    assert r.data[:2] == b"\x55\x66"


def roundtrip(**kw):
    s = synthesize_kcs(KcsSpec(**kw))
    return s, decode_kcs(s.samples, s.rate_hz)


def assert_all_bytes(s, r, *, time_tol_s=1.5e-4):
    assert r.data == s.data and r.framing_errors == () and r.valid
    assert r.baud == s.baud
    assert np.max(np.abs(r.byte_times_s - s.byte_times_s)) < time_tol_s


@pytest.mark.parametrize("baud", [300, 1200])
def test_clean_round_trip_and_baud_detection(baud):
    s, r = roundtrip(data=DATA[:60] if baud == 300 else DATA, baud=baud)
    assert_all_bytes(s, r)


@pytest.mark.parametrize("speed", [0.9, 1.1])
def test_tape_speed_off_by_ten_percent(speed):
    s, r = roundtrip(data=DATA, baud=1200, speed=PlaySpeed.constant(speed), playback=Playback(snr_db=25))
    assert_all_bytes(s, r)
    assert r.speed == pytest.approx(speed, rel=0.02)


def test_wow_and_flutter():
    s, r = roundtrip(data=DATA, baud=1200, speed=PlaySpeed.constant(1.05, wow_depth=0.03, wow_hz=0.8,
                                                                    flutter_depth=0.01, flutter_hz=12.0))
    assert_all_bytes(s, r)


def test_tone_not_starting_at_zero_crossings_and_fractional_idle():
    s, r = roundtrip(data=DATA, baud=1200, bit_phase_deg=70.0, idle_bits=(0.0, 0.37, 2.5, 11.2))
    assert_all_bytes(s, r)


def test_narrow_band_square_tone_with_hum_and_dc():
    # a 300–3500 Hz playback band keeps only the fundamental of the 2400 Hz square wave
    s, r = roundtrip(data=DATA, baud=1200, shape="square",
                     playback=Playback(band_hz=(300.0, 3500.0), snr_db=20, hum_level=1.0, hum_hz=60.0,
                                       dc_offset=0.4))
    assert_all_bytes(s, r, time_tol_s=2.5e-4)      # the band's causal filter delays the tones


def test_shallow_dropout_loses_nothing():
    s, r = roundtrip(data=DATA[:80], baud=300, playback=Playback(snr_db=35, dropouts=((0.6, 0.08, 20.0),)))
    assert_all_bytes(s, r)


def test_deep_dropout_in_noise_is_reported_not_hidden():
    s, r = roundtrip(data=DATA[:80], baud=300, playback=Playback(snr_db=30, dropouts=((0.6, 0.08, 60.0),)))
    assert not r.valid
    ((a, b),) = r.dropouts
    assert 0.58 < a < 0.62 and 0.66 < b < 0.72            # the dropout spans 0.6–0.68 s
    good = [i for i, t in enumerate(s.byte_times_s) if t + 11 / 300 < 0.6 - 0.002]
    assert r.data[: len(good)] == s.data[: len(good)]
    # reading resumes after the dropout: the last 40 bytes come back intact
    assert r.data.endswith(s.data[-40:])


def test_data_without_a_leader_is_not_read():
    s, r = roundtrip(data=DATA[:20], baud=300, leader_s=0.0, quiet_s=0.05)
    assert r.data == b"" and not r.valid


def test_bytes_are_read_at_a_96_khz_rate():
    s, r = roundtrip(data=DATA[:100], baud=1200, rate_hz=96_000.0)
    assert_all_bytes(s, r)


def test_json_follows_the_contract():
    s, r = roundtrip(data=b"\x00\x01\xfe\xff", baud=300)
    d = json.loads(json.dumps(kcs_json(r)))
    assert {"channel", "format", "direction", "valid", "start_s", "end_s", "data_hex", "baud",
            "framing_errors", "byte_times_s"} <= set(d)
    assert (d["format"], d["data_hex"], d["baud"], d["framing_errors"], d["valid"]) == ("kcs", "0001feff", 300, [], True)
    assert len(d["byte_times_s"]) == 4 and d["start_s"] == d["byte_times_s"][0] < d["end_s"]


@pytest.mark.parametrize("kw", [dict(rate_hz=8_000.0), dict(baud=600), dict(min_leader_s=0.0)])
def test_bad_parameters_are_clear_errors(kw):
    rate = kw.pop("rate_hz", RATE_HZ)
    with pytest.raises(ParameterError):
        decode_kcs(np.zeros(4800), rate, **kw)
