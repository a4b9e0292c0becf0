"""Which track, undersampling, why a channel gave no read, every channel listed, what an
incomplete read lacks.

Facts used: densities 210 bpi (tracks 1, 3) and 75 bpi (track 2), ISO/IEC 7811-2; start
sentinel about 7.4 mm from the card edge, about 61 leading zeros at 210 bpi and 22 at 75 bpi
(edge distance from memory, medium confidence); BCD start sentinel ';' = 1101 LSB first with
odd parity, ISO/IEC 7811-2.  Speeds are checked against the synthesizer's own profile.
"""

from __future__ import annotations

import json

import numpy as np
import pytest

from conftest import run_cli as run
from readchan.io.capture import Capture
from readchan.io.write import write_capture
from readchan.channel import DecodeSettings, decode_capture
from readchan.formats.iso7811.density import decide_track
from readchan.measure.diagnose import inspect_capture
from readchan.errors import EXIT_BAD_INPUT, EXIT_INVALID, EXIT_NO_DATA, EXIT_VALID
from readchan.formats.iso7811.charset import ISO_BCD
from readchan.formats.iso7811.framing import encode_text, frame, missing_end
from readchan.synth import Impairments, SpeedProfile, SynthSpec, TrackContent, synthesize
from readchan.synth.card import parse_bits, track_content
from readchan.synth.chain import FrontEnd
from readchan.synth.head import KarlqvistPulse, LorentzianPulse

SHORT = ";12345678901234=5678?"          # fits track 2 and track 3 alike
T1 = "%B9912345678901239^QUILL/ODESSA M^2912101000000000000?"   # invented
NO_SENTINEL = "0" * 40 + "1" * 120 + "0" * 40   # regular F2F; neither ';' nor '%' in it, either way


def _synth(tracks, *, speed_cm_s=30.0, rate_hz=48_000.0, pulse=None, imp=None, fe=None, seed=0):
    spec = SynthSpec(tracks=tuple(tracks), speed=SpeedProfile(speed_cm_s), rate_hz=rate_hz, seed=seed,
                     pulse=pulse or KarlqvistPulse(), impairments=imp or Impairments(snr_db=35.0, edge_pulses=True),
                     front_end=fe or FrontEnd())
    res = synthesize(spec)
    return Capture(res.samples, rate_hz, source="<synth>", units="FS"), res


def _reads(cap, **kw):
    return [r for ch in decode_capture(cap, DecodeSettings(**kw)) for r in ch.reads]


def _noise(n=24_000, seed=0):
    return 0.01 * np.random.default_rng(seed).standard_normal(n)


# --- which track --------------------------------------------------------------------------------


def test_a_short_track_3_read_is_track_3_at_its_true_speed():
    cap, _ = _synth([track_content(SHORT, track=3)], speed_cm_s=40.0)
    (r,) = _reads(cap)
    assert r.track.number == 3 and r.track_evidence.basis == "physics"
    assert r.mean_speed_cm_s == pytest.approx(40.0, rel=0.03)      # not 2.8 × 40


def test_a_short_track_2_read_is_track_2_by_physics():
    cap, _ = _synth([track_content(SHORT, track=2)], speed_cm_s=40.0)
    (r,) = _reads(cap)
    assert r.track.number == 2 and r.track_evidence.basis == "physics"
    assert r.track_evidence.leading_zeros == 22
    assert r.mean_speed_cm_s == pytest.approx(40.0, rel=0.03)


def test_track_3_through_a_preamp_low_pass_is_still_track_3():
    # preamp corner at 2.2 × the pulse rate (1 / half cell) at 30 cm/s, 210 bpi
    half_cell_s = 0.0254 / 210 / 2 / 0.30
    fe = FrontEnd(ac_coupling_hz=20.0, preamp_lowpass_hz=2.2 / half_cell_s)
    cap, _ = _synth([track_content(SHORT, track=3)], fe=fe)
    (r,) = _reads(cap)
    assert r.track.number == 3


def test_the_pulse_width_alone_decides_when_the_zeros_say_nothing():
    # 10 leading zeros: too few to tell 61 from 22; PW50 0.35 cell only a 210 bpi head gives
    cap, _ = _synth([track_content(SHORT, track=3, leading_zeros=10)])
    (r,) = _reads(cap)
    assert r.track_evidence.zeros_vote is None and r.track_evidence.pw50_vote == 210.0
    assert r.track.number == 3


def test_undecided_evidence_is_reported_as_ambiguous():
    # PW50 0.14 cell at 210 bpi: a 17 µm head at 210 bpi or a 47 µm one at 75 bpi; 10 zeros
    pulse = LorentzianPulse(0.14 * 0.0254 / 210)
    cap, _ = _synth([track_content(SHORT, track=3, leading_zeros=10)], pulse=pulse)
    (r,) = _reads(cap)
    assert r.track_evidence.ambiguous
    assert r.track_evidence.text().startswith("ambiguous")


def test_decode_marks_an_ambiguous_track_in_its_table():
    from rich.console import Console

    from readchan.report.render import decode_table
    pulse = LorentzianPulse(0.14 * 0.0254 / 210)
    cap, _ = _synth([track_content(SHORT, track=3, leading_zeros=10)], pulse=pulse)
    console = Console(width=200, record=True)
    console.print(decode_table(_reads(cap)))
    assert "│ 2?    │" in console.export_text()


def test_conflicting_evidence_is_ambiguous():
    ev = decide_track(ISO_BCD.name, 20, 0, 1, pw50_cell=0.3, zeros=22)
    assert ev.ambiguous and ev.pw50_vote == 210.0 and ev.zeros_vote == 75.0


def test_an_explicit_track_overrides_the_evidence():
    cap, _ = _synth([track_content(SHORT, track=3)])
    (r,) = _reads(cap, track=2)
    assert r.track.number == 2 and r.track_evidence.basis == "given"


def test_decode_says_which_track_was_assumed_and_why(monkeypatch, capsys, tmp_path):
    cap, res = _synth([track_content(SHORT, track=3)])
    path = write_capture(tmp_path / "t3.wav", res.samples, res.rate_hz)
    code, out, _ = run(monkeypatch, capsys, "decode", path)
    assert code == EXIT_VALID
    assert "track 3 (210 bpi): PW50" in out and "leading zeros" in out
    code, out, _ = run(monkeypatch, capsys, "decode", "--json", path)
    assert json.loads(out)["reads"][0]["track_basis"] == "physics"


# --- undersampling ------------------------------------------------------------------------------


def test_an_undersampled_capture_gives_one_warning_line_in_decode(monkeypatch, capsys, tmp_path):
    # 11025 Hz, track 1 at 30 cm/s: a half cell of 202 µs is 2.2 samples
    cap, res = _synth([track_content(T1, track=1)], rate_hz=11_025.0)
    path = write_capture(tmp_path / "slow.wav", res.samples, res.rate_hz)
    _, _, err = run(monkeypatch, capsys, "decode", path)
    lines = [ln for ln in err.splitlines() if "warning" in ln]
    assert len(lines) == 1 and lines[0].startswith("readchan: warning:") and "undersampled" in lines[0]
    assert "2.2 samples per half cell" in lines[0]


def test_a_well_sampled_capture_gives_no_warning(monkeypatch, capsys, tmp_path):
    cap, res = _synth([track_content(T1, track=1)])
    path = write_capture(tmp_path / "ok.wav", res.samples, res.rate_hz)
    _, _, err = run(monkeypatch, capsys, "decode", path)
    assert "warning" not in err


def test_inspect_verdict_names_undersampling():
    cap, _ = _synth([track_content(T1, track=1)], rate_hz=11_025.0)
    (ch,) = inspect_capture(cap)
    (r,) = ch.reads
    assert "half_cell_samples" in [c.limit.name for c in r.failed]
    assert r.verdict.startswith("undersampled")


def test_synth_refuses_an_undersampling_rate_unless_forced(monkeypatch, capsys, tmp_path):
    target = tmp_path / "u.wav"
    code, _, err = run(monkeypatch, capsys, "synth", target, "--track1", "%ABC?", "--rate-hz", "8000")
    assert code == EXIT_BAD_INPUT and not target.exists()
    assert len(err.strip().splitlines()) == 1 and "undersamples" in err and "--force" in err
    code, _, _ = run(monkeypatch, capsys, "synth", target, "--track1", "%ABC?", "--rate-hz", "8000", "--force")
    assert code == EXIT_VALID and target.exists()


# --- why no read -----------------------------------------------------------------------------------


def _status(cap, channel=0):
    return decode_capture(cap)[channel].status


def test_noise_alone_is_no_activity():
    st = _status(Capture(_noise()[:, None], 48_000.0, source="<noise>"))
    assert st.state == "no-activity" and not st.recording
    assert st.reason.startswith("no activity above noise")


def test_pulses_at_random_times_are_not_f2f_regular():
    rate = 48_000.0
    rng = np.random.default_rng(3)
    t_s = 0.02 + np.cumsum(rng.uniform(0.2e-3, 2e-3, 300))
    t = np.arange(int((t_s[-1] + 0.02) * rate)) / rate
    x = _noise(t.size)
    for k, tk in enumerate(t_s):                 # Lorentzian pulses, alternating, 60 µs wide
        x += (-1) ** k * 0.5 / (1 + (2 * (t - tk) / 60e-6) ** 2)
    st = _status(Capture(x[:, None], rate, source="<random>"))
    assert st.state == "irregular" and not st.recording
    assert "not F2F-regular" in st.reason


def test_regular_f2f_without_a_start_sentinel_says_so():
    cap, _ = _synth([TrackContent(parse_bits(NO_SENTINEL), 210.0)])
    st = _status(cap)
    assert st.state == "no-sentinel" and st.recording
    assert "no start sentinel" in st.reason and "either direction" in st.reason


def test_too_few_clocking_zeros_says_how_many():
    cap, _ = _synth([track_content(SHORT, track=2, leading_zeros=4)])
    st = _status(cap)
    assert st.state == "few-zeros"
    assert "only 4 clocking zeros" in st.reason


def test_clipping_is_named_in_the_reason():
    cap, _ = _synth([TrackContent(parse_bits(NO_SENTINEL), 210.0)], imp=Impairments(snr_db=35.0, clip=0.3))
    assert "clipped" in _status(cap).reason


def test_undersampling_is_named_first_in_the_reason():
    cap, _ = _synth([track_content(T1, track=1)], rate_hz=8_000.0)
    st = _status(cap)
    assert not decode_capture(cap)[0].reads
    assert st.reason.startswith("undersampled at 8000 Hz")


# --- every channel listed, exit codes ------------------------------------------------------------


def _two_channels(tmp_path, second: np.ndarray):
    cap, res = _synth([track_content(T1, track=1)])
    x = np.column_stack([res.samples[:, 0], second[: res.samples.shape[0]]])
    return write_capture(tmp_path / "two.wav", x, res.rate_hz)


def test_a_channel_without_activity_is_listed_and_keeps_exit_code_0(monkeypatch, capsys, tmp_path):
    path = _two_channels(tmp_path, _noise(100_000))
    code, out, _ = run(monkeypatch, capsys, "decode", path)
    assert code == EXIT_VALID
    assert "channel 1: no framed data: no activity above noise" in out
    code, out, _ = run(monkeypatch, capsys, "decode", "--json", path)
    doc = json.loads(out)
    assert [c["state"] for c in doc["channels"]] == ["read", "no-activity"]


def test_a_regular_recording_without_a_read_makes_exit_code_1(monkeypatch, capsys, tmp_path):
    _, res = _synth([TrackContent(parse_bits(NO_SENTINEL), 210.0)])
    path = _two_channels(tmp_path, np.concatenate([res.samples[:, 0], np.zeros(100_000)]))
    code, out, _ = run(monkeypatch, capsys, "decode", path)
    assert code == EXIT_INVALID
    assert "channel 1: no framed data: regular F2F" in out
    code, _, _ = run(monkeypatch, capsys, "inspect", path)
    assert code == EXIT_INVALID


def test_only_a_regular_recording_without_a_read_is_exit_code_1_not_3(monkeypatch, capsys, tmp_path):
    _, res = _synth([TrackContent(parse_bits(NO_SENTINEL), 210.0)])
    path = write_capture(tmp_path / "ns.wav", res.samples, res.rate_hz)
    code, _, _ = run(monkeypatch, capsys, "decode", path)
    assert code == EXIT_INVALID


def test_noise_alone_is_still_exit_code_3(monkeypatch, capsys, tmp_path):
    path = write_capture(tmp_path / "n.wav", _noise()[:, None], 48_000.0)
    code, out, _ = run(monkeypatch, capsys, "decode", path)
    assert code == EXIT_NO_DATA and "no activity above noise" in out


# --- what an incomplete read lacks ----------------------------------------------------------------


def test_a_text_ending_in_the_end_sentinel_lacks_the_lrc():
    bits = np.concatenate([np.zeros(22, np.uint8), encode_text(SHORT, ISO_BCD)[:-5]])   # LRC cut off
    fr = frame(bits, ISO_BCD)
    assert not fr.complete and fr.text.endswith("?")
    assert missing_end(fr) == "no LRC"


def test_a_text_cut_before_the_end_sentinel_lacks_the_end_sentinel():
    bits = np.concatenate([np.zeros(22, np.uint8), encode_text(SHORT, ISO_BCD)[:-15]])
    fr = frame(bits, ISO_BCD)
    assert not fr.complete and not fr.text.endswith("?")
    assert missing_end(fr) == "no end sentinel"
