"""The format registry and ``--format auto``: every format registered once, tried in family order,
and a capture read only by the family it belongs to.

What counts as a card read, a timecode frame and a cassette byte is each format's own rule
(ISO/IEC 7811 parity, LRC and sentinels; SMPTE ST 12-1 sync word, BCD ranges and polarity bit;
the Kansas City standard's start and stop bits after a mark leader); these tests check the
wiring: that decoding a capture with no ``--format`` finds its format, and never another
family's read.  Captures come from the synthesizers with invented content.
"""

from __future__ import annotations

import json

import numpy as np
import pytest
import soundfile as sf

from readchan.channel import DecodeSettings, decode_capture, decode_channel
from readchan.errors import ParameterError
from readchan.formats import registry
from readchan.formats.iso7811.charset import CharFormat
from readchan.formats.iso7811.framing import encode_text
from readchan.io.capture import Capture
from readchan.report.render import read_dict, reads_of
from readchan.synth import SpeedProfile, SynthSpec, TrackContent, synthesize
from readchan.synth.kcs import KcsSpec, synthesize_kcs
from readchan.synth.ltc import LtcSpec, synthesize_ltc
from readchan.synth.playback import Playback, PlaySpeed
from tests.conftest import run_cli, synth_capture
from tests.test_tape_negative import NEGATIVES, RATE_HZ

# an invented card format of a demo scenario: a depot's 5-bit tool pass, even parity, LRC
DEPOT_PASS = CharFormat("depot-pass", 5, "even", 0x30, 0x0B, 0x0F, 0x0D, True, 40)


def _reads(cap: Capture, **kw):
    return reads_of(decode_capture(cap, DecodeSettings(**kw)))


def _ltc_capture(**kw) -> Capture:
    s = synthesize_ltc(LtcSpec(**{"start": "10:20:30:00", "rate_fps": 25, "duration_s": 1.0, **kw}))
    return Capture(s.samples[:, None] if s.samples.ndim == 1 else s.samples, s.rate_hz, source="<ltc>", units="FS")


def _kcs_capture(data: bytes = b"Quarry Lane inventory 14\n", **kw) -> Capture:
    s = synthesize_kcs(KcsSpec(data=data, **kw))
    return Capture(s.samples[:, None] if s.samples.ndim == 1 else s.samples, s.rate_hz, source="<kcs>", units="FS")


def test_the_built_in_formats_are_registered_once_in_family_order():
    names = [f.name for f in registry.all_formats()]
    assert names[:4] == ["iso-alpha", "iso-bcd", "ltc", "kcs"]
    assert len(names) == len(set(names))
    assert [fam for fam, _ in registry.families(registry.candidates("auto"))][:3] == ["card", "timecode", "cassette"]


def test_each_format_names_its_line_code_and_what_it_needs_from_the_front_end():
    by_name = {f.name: f for f in registry.all_formats()}
    assert by_name["iso-alpha"].line_code == by_name["ltc"].line_code == "f2f"    # biphase mark is F2F
    assert by_name["kcs"].line_code == "fsk"
    assert all(f.front_end and f.summary for f in by_name.values())


def test_a_name_already_registered_is_refused():
    with pytest.raises(ParameterError, match="already registered"):
        registry.register(registry.get("ltc").__class__(**{**registry.get("ltc").__dict__, "summary": "again"}))


@pytest.mark.parametrize("name", ["auto", "custom", "", "two words"])
def test_a_format_name_must_be_a_word_other_than_auto_and_custom(name):
    fmt = registry.get("kcs")
    with pytest.raises(ParameterError, match="format name"):
        registry.register(fmt.__class__(**{**fmt.__dict__, "name": name}))


def test_an_unknown_format_name_is_an_error_that_lists_the_registered_ones():
    with pytest.raises(ParameterError, match="iso-alpha.*ltc.*kcs"):
        DecodeSettings(format="morse")


def test_built_in_formats_cannot_be_unregistered():
    with pytest.raises(ParameterError, match="built in"):
        registry.unregister("iso-bcd")


def test_a_timecode_capture_gives_timecode_reads_and_no_card_read():
    reads = _reads(_ltc_capture())
    assert reads and {r.format for r in reads} == {"ltc"}
    assert reads[0].payload.frames[0].timecode.startswith("10:20:30:")


def test_a_reverse_shuttle_timecode_capture_is_found_without_a_format():
    cap = _ltc_capture(speed=PlaySpeed.shuttle(1.0, 6.0, 0.3, 0.3), direction="reverse", rate_hz=192_000.0)
    reads = _reads(cap)
    assert [r.format for r in reads] == ["ltc"] and reads[0].direction == "reverse"


def test_a_cassette_capture_gives_its_bytes_and_no_card_read():
    reads = _reads(_kcs_capture(baud=1200))
    assert [r.format for r in reads] == ["kcs"]
    assert reads[0].payload.data == b"Quarry Lane inventory 14\n" and reads[0].valid


@pytest.mark.parametrize("speed_cm_s", [20.0, 80.0, 150.0])
def test_a_card_swipe_gives_card_reads_only(demo_texts, speed_cm_s):
    cap, _ = synth_capture({2: demo_texts[2]}, speed=SpeedProfile(speed_cm_s), seed=3)
    results = decode_capture(cap, DecodeSettings())
    assert [ch.family for ch in results] == ["card"]
    assert [r.format for r in reads_of(results)] == ["iso-bcd"]


@pytest.mark.parametrize("seed", range(6))
def test_a_failing_card_swipe_is_never_read_as_tape(demo_texts, seed):
    """Track 2 at 80 cm/s puts its cells at 1.2 and 2.4 kHz, the cassette tones: noisy enough
    to fail as a card, it must still not become a cassette or timecode read."""
    from readchan.synth import Impairments

    cap, _ = synth_capture({2: demo_texts[2]}, speed=SpeedProfile(80.0), seed=seed,
                           imp=Impairments(snr_db=9.0, jitter=0.08))
    assert all(r.format == "iso-bcd" for r in _reads(cap))


def test_an_explicit_tape_format_on_a_card_capture_finds_nothing(demo_texts):
    cap, _ = synth_capture({2: demo_texts[2]}, speed=SpeedProfile(30.0))
    assert _reads(cap, format="ltc") == [] and _reads(cap, format="kcs") == []


def test_an_explicit_card_format_on_a_timecode_capture_gives_no_tape_read():
    assert all(r.format.startswith("iso") for r in _reads(_ltc_capture(), fmt=registry.get("iso-bcd").char_format))


def test_decode_json_carries_the_tape_contract_keys(tmp_path, monkeypatch, capsys):
    path = tmp_path / "reel-7.wav"
    s = synthesize_ltc(LtcSpec(start="23:59:59:20", rate_fps=25, duration_s=1.0))
    sf.write(path, 0.9 * s.samples / np.abs(s.samples).max(), int(s.rate_hz), subtype="PCM_16")
    code, out, _ = run_cli(monkeypatch, capsys, "decode", path, "--json")
    (read,) = json.loads(out)["reads"]
    assert code == 0
    assert {"source", "channel", "format", "direction", "valid", "start_s", "end_s", "frames", "rate_fps",
            "rate_fps_candidates", "events"} <= set(read)
    assert read["format"] == "ltc" and read["valid"]
    # the 24-hour rollover is continuous timecode, not an event (SMPTE ST 12-1)
    assert "00:00:00:00" in [f["timecode"] for f in read["frames"]] and read["events"] == []


def test_a_registered_custom_card_format_is_found_by_auto():
    bits = np.concatenate((np.zeros(30, np.uint8), encode_text("=2417=0086=", DEPOT_PASS), np.zeros(30, np.uint8)))
    res = synthesize(SynthSpec(tracks=(TrackContent(bits, 75.0),), speed=SpeedProfile(40.0), seed=5))
    cap = Capture(res.samples, res.rate_hz, source="<depot>", units="FS")
    assert not any(r.valid for r in _reads(cap))           # not an ISO format
    fmt = registry.register_card_format(DEPOT_PASS)
    try:
        (read,) = _reads(cap)
        assert (read.format, read.valid, read.frame.text) == ("depot-pass", True, ";=2417=0086=?")
        assert read_dict(read)["format"] == "depot-pass"
    finally:
        registry.unregister(fmt.name)
    assert "depot-pass" not in [f.name for f in registry.all_formats()]


def test_decode_channel_keeps_the_outliers_it_repaired_whichever_family_reads():
    s = synthesize_kcs(KcsSpec(data=b"\x01\x02"))
    x = s.samples.copy()
    x[1000] = 1e200          # a corrupted float: non-physical, repaired before any family reads
    with pytest.warns(Warning):
        result = decode_channel(x, s.rate_hz)
    assert result.family == "cassette" and list(result.outliers) == [1000]


@pytest.mark.parametrize("name", sorted(NEGATIVES))
def test_a_negative_capture_gives_no_valid_read_of_any_format(name):
    cap = Capture(NEGATIVES[name]()[:, None], RATE_HZ, source=f"<{name}>", units="FS")
    assert not any(r.valid for r in _reads(cap))


def test_a_read_survives_pickling_for_process_pools():
    import pickle

    from readchan.io.capture import load_capture

    from pathlib import Path

    (read, *_) = _reads(load_capture(Path(__file__).resolve().parents[1] / "fixtures" / "three-track-swipe.wav"))
    again = pickle.loads(pickle.dumps(read))
    assert (again.format, again.valid, again.frame.text, len(again.bits)) == \
        (read.format, read.valid, read.frame.text, len(read.bits))
