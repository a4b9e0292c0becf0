"""Reachable hostile input: each case is a one-line error with exit code 2, or a correct result.

Every case here once ended in an internal error (exit 4), ran out of memory, or was accepted
silently with a value other than the one given.
"""

from __future__ import annotations

import json
import os
import warnings
from pathlib import Path

import numpy as np
import pytest
import soundfile as sf

from conftest import run_cli, synth_capture
from readchan.io.audio import TruncatedCaptureWarning
from readchan.io.capture import Capture, NonPhysicalSampleWarning, load_capture, repair_outliers
from readchan.io.checks import MAX_SAMPLES, RATE_RANGE_HZ, display_path
from readchan.io.write import check_output_path, write_capture
from readchan.frontend.condition import ConditionSettings
from readchan.channel import DecodeSettings, decode_capture, decode_channel
from readchan.errors import CaptureError, FormatError, ParameterError
from readchan.formats.iso7811.charset import parse_format
from readchan.report.render import reads_of
from readchan.synth import (SAMPLE_LIMIT, Impairments, SpeedProfile, SynthSpec, estimate_samples, synthesize)
from readchan.synth.card import track_content
from readchan.synth.head import KarlqvistPulse, LorentzianPulse

TEXT = "%B9912345678901239^QUILL/ODESSA M^2912101000000000000?"     # invented card, Luhn-valid


@pytest.fixture(scope="module")
def swipe():
    """A clean track 1 swipe at 48 kHz: (samples, rate_hz)."""
    cap, _ = synth_capture({1: TEXT}, imp=Impairments(snr_db=40.0), seed=3)
    return cap.samples[:, 0].copy(), cap.rate_hz


def one_line_error(err: str) -> str:
    lines = [ln for ln in err.splitlines() if ln.strip()]
    assert len(lines) == 1, err
    assert lines[0].startswith("readchan: error: "), err
    return lines[0]


# --------------------------------------------------------------------------- audio headers


def _flac_claiming(path: Path, samples: np.ndarray, rate: int, total: int) -> Path:
    """A FLAC file whose STREAMINFO says it holds ``total`` samples (FLAC format spec:
    STREAMINFO bytes 10..17 pack rate 20 bits, channels-1 3, bits-1 5, total samples 36)."""
    sf.write(path, samples, rate, subtype="PCM_24", format="FLAC")
    data = bytearray(path.read_bytes())
    assert data[:4] == b"fLaC"
    packed = int.from_bytes(data[18:26], "big")
    packed = (packed & ~((1 << 36) - 1)) | total
    data[18:26] = packed.to_bytes(8, "big")
    path.write_bytes(bytes(data))
    return path


def test_flac_header_claiming_2_to_the_36_samples_loads_what_the_file_holds(tmp_path, swipe):
    x, rate = swipe
    path = _flac_claiming(tmp_path / "claims.flac", 0.9 * x, int(rate), (1 << 36) - 1)
    with pytest.warns(TruncatedCaptureWarning, match="68719476735"):
        cap = load_capture(path)
    # all but at most the last block of the codec's frame is recovered, and nothing more
    assert x.size - 4096 <= cap.n_samples <= x.size
    np.testing.assert_allclose(cap.channel(0), 0.9 * x[:cap.n_samples], atol=2.0 ** -22)


def test_flac_claiming_2_to_the_36_samples_decodes_from_the_command_line(tmp_path, swipe, monkeypatch, capsys):
    x, rate = swipe
    path = _flac_claiming(tmp_path / "claims.flac", 0.9 * x, int(rate), (1 << 36) - 1)
    code, out, err = run_cli(monkeypatch, capsys, "decode", path, "--unmask")
    assert code == 0
    assert TEXT in out
    assert err.count("readchan: warning:") == 1


def test_audio_over_the_sample_limit_is_refused_before_it_is_read(tmp_path, monkeypatch):
    import readchan.io.audio as audio

    path = tmp_path / "long.wav"
    sf.write(path, np.zeros(5000), 48000, subtype="PCM_16")
    monkeypatch.setattr(audio, "MAX_SAMPLES", 1000)
    with pytest.raises(CaptureError, match="more than 1,000 sample values"):
        load_capture(path)
    assert MAX_SAMPLES == 250_000_000


# --------------------------------------------------------------------------- rates


def _one_column_csv(path: Path, x: np.ndarray) -> Path:
    path.write_text("".join(f"{v:.9g}\n" for v in x), encoding="utf-8")
    return path


@pytest.mark.parametrize("step_s", [1e-12, 1e-300])
def test_csv_whose_time_step_is_absurdly_small_is_refused_naming_the_range(tmp_path, step_s):
    path = tmp_path / "fast.csv"
    path.write_text("time,ch1\n" + "".join(f"{i * step_s!r},{np.sin(i / 5):.6f}\n" for i in range(200)),
                    encoding="utf-8")
    with pytest.raises(CaptureError) as e:
        load_capture(path)
    assert "readchan decodes 100 Hz to 1e+09 Hz" in str(e.value)
    assert "\n" not in str(e.value)


@pytest.mark.parametrize("rate", ["1e11", "1e308", "50"])
def test_given_rate_outside_the_range_is_a_one_line_error_with_exit_2(tmp_path, monkeypatch, capsys, rate):
    path = _one_column_csv(tmp_path / "one.csv", np.sin(np.arange(500) / 5.0))
    code, _, err = run_cli(monkeypatch, capsys, "decode", path, "--rate-hz", rate)
    assert code == 2
    assert "between 100 Hz and 1e+09 Hz" in one_line_error(err)


def test_in_memory_capture_at_a_rate_outside_the_range_is_refused_by_the_decoder():
    with pytest.raises(ParameterError, match="between 100 Hz"):
        decode_channel(np.zeros(1000), 1e11)
    assert RATE_RANGE_HZ == (100.0, 1e9)


# --------------------------------------------------------------------------- filter settings


@pytest.mark.parametrize("notch", ["0", "-0", "1e-300", "-5", "-inf", "nan", "inf", 0.0, -0.0, float("nan")])
def test_notch_that_is_not_a_frequency_is_refused_naming_the_range(notch):
    with pytest.raises(ParameterError, match="at least 1 Hz and below the capture's Nyquist"):
        DecodeSettings(notch=notch)


@pytest.mark.parametrize("notch", [24_000.0, 30_000.0])
def test_notch_at_or_above_nyquist_is_refused_when_decoding(swipe, notch):
    x, rate = swipe
    with pytest.raises(ParameterError, match="24000 Hz"):
        decode_channel(x, rate, DecodeSettings(notch=notch))


def test_notch_just_below_nyquist_is_applied_and_the_card_still_reads(swipe):
    x, rate = swipe
    result = decode_channel(x, rate, DecodeSettings(notch=23_000.0))
    assert [r.frame.text for r in result.reads if r.valid] == [TEXT]


@pytest.mark.parametrize("option, value", [("--notch", "0"), ("--notch", "-0"), ("--notch", "nan"),
                                           ("--notch", "inf"), ("--notch", "24000"),
                                           ("--highpass-hz", "1e-308"), ("--lowpass-hz", "1e-308"),
                                           ("--lowpass-hz", "5e-324"), ("--lowpass-hz", "24000")])
def test_absurd_filter_options_are_one_line_errors_with_exit_2(tmp_path, swipe, monkeypatch, capsys, option, value):
    x, rate = swipe
    path = write_capture(tmp_path / "card.wav", x, rate, kind="wav24")
    code, _, err = run_cli(monkeypatch, capsys, "decode", path, f"{option}={value}")
    assert code == 2
    one_line_error(err)


@pytest.mark.parametrize("field, value", [("highpass_hz", 1e-308), ("highpass_hz", -1.0), ("highpass_hz", np.inf),
                                          ("lowpass_hz", 1e-308), ("lowpass_hz", 5e-324), ("lowpass_hz", np.nan),
                                          ("notch_hz", (0.0,)), ("notch_q", 0.0)])
def test_condition_settings_refuse_out_of_range_values_naming_the_parameter(field, value):
    with pytest.raises(ParameterError, match=field):
        ConditionSettings(**{field: value})


def test_highpass_zero_turns_the_baseline_filter_off():
    assert ConditionSettings(highpass_hz=-0.0).highpass_hz == 0.0


# --------------------------------------------------------------------------- synthesizer parameters


def test_jitter_of_minus_zero_is_zero_jitter():
    tracks = (track_content("%AB?", track=1),)
    a = synthesize(SynthSpec(tracks=tracks, impairments=Impairments(jitter=-0.0), seed=1)).samples
    b = synthesize(SynthSpec(tracks=tracks, impairments=Impairments(jitter=0.0), seed=1)).samples
    np.testing.assert_array_equal(a, b)


@pytest.mark.parametrize("seed", [-1, 2 ** 63, 1.5, True])
def test_seed_outside_0_to_2_63_is_refused(seed):
    with pytest.raises(ParameterError, match="seed must be an integer from 0"):
        SynthSpec(tracks=(track_content("%AB?", track=1),), seed=seed)


def test_density_of_zero_is_refused_not_replaced_by_the_default():
    with pytest.raises(ParameterError, match="between 1 and 10000 bpi"):
        track_content("%AB?", track=1, density_bpi=0)


@pytest.mark.parametrize("make", [lambda: KarlqvistPulse(gap_m=1e302), lambda: KarlqvistPulse(spacing_m=1e302),
                                  lambda: KarlqvistPulse(transition_m=2e-2), lambda: LorentzianPulse(1e302)])
def test_head_dimensions_beyond_ten_millimetres_are_refused_naming_the_range(make):
    with pytest.raises(ParameterError, match=r"10000 µm"):
        make()


@pytest.mark.parametrize("args", [["--jitter", "-0"], ["--density-bpi", "0"], ["--seed", "-1"],
                                  ["--head-gap-um", "1e308"]])
def test_synth_options_are_validated_from_the_command_line(tmp_path, monkeypatch, capsys, args):
    out = tmp_path / "card.wav"
    code, _, err = run_cli(monkeypatch, capsys, "synth", out, "--track1", "%AB?", *args)
    if args == ["--jitter", "-0"]:
        assert code == 0 and out.exists()
    else:
        assert code == 2 and not out.exists()
        one_line_error(err)


@pytest.mark.parametrize("speed, rate_hz, swipes, gap_s, bpi", [
    (0.1, 5e6, 1, 0.25, None),          # a slow swipe at a high rate
    (30.0, 48_000.0, 2, 3600.0, None),  # an hour between two swipes
    (0.1, 48_000.0, 1, 0.25, 1.0),      # 1 bpi at 1 mm/s
])
def test_synth_refuses_a_capture_over_the_sample_limit_before_rendering(speed, rate_hz, swipes, gap_s, bpi):
    spec = SynthSpec(tracks=(track_content("%AB?", track=1, density_bpi=bpi),), speed=SpeedProfile(speed),
                     rate_hz=rate_hz, swipes=swipes, gap_s=gap_s)
    assert estimate_samples(spec) > SAMPLE_LIMIT
    with pytest.raises(ParameterError, match="over the limit of 50,000,000"):
        synthesize(spec)


def test_sample_estimate_is_what_synthesize_renders():
    spec = SynthSpec(tracks=(track_content("%AB?", track=1), track_content(";12?", track=2)), swipes=2)
    assert synthesize(spec).samples.size == estimate_samples(spec)


def test_synth_over_the_limit_exits_2_and_writes_nothing(tmp_path, monkeypatch, capsys):
    out = tmp_path / "long.wav"
    code, _, err = run_cli(monkeypatch, capsys, "synth", out, "--track1", "%AB?", "--pause-s", "3600", "--swipes", "2")
    assert code == 2 and not out.exists()
    assert "--force" in one_line_error(err)


# --------------------------------------------------------------------------- output names


LONG = "x" * 300


def test_write_capture_refuses_a_name_longer_than_the_file_system_allows(tmp_path):
    with pytest.raises(ParameterError, match="too long"):
        write_capture(tmp_path / f"{LONG}.wav", np.zeros(100), 48000.0)


def test_a_name_just_within_the_limit_is_written_and_leaves_no_temporary_file(tmp_path):
    name = "y" * 251 + ".wav"                        # 255 bytes: the temporary name must be shorter
    path = write_capture(tmp_path / name, np.zeros(100), 48000.0)
    assert path.exists()
    assert sorted(p.name for p in tmp_path.iterdir()) == [name]


def test_synth_with_a_300_character_name_is_a_one_line_error(tmp_path, monkeypatch, capsys):
    code, _, err = run_cli(monkeypatch, capsys, "synth", tmp_path / f"{LONG}.wav", "--track1", "%AB?")
    assert code == 2
    assert "too long" in one_line_error(err)


def test_inspect_plot_with_a_300_character_name_is_a_one_line_error(tmp_path, swipe, monkeypatch, capsys):
    x, rate = swipe
    path = write_capture(tmp_path / "card.wav", x, rate, kind="wav24")
    code, _, err = run_cli(monkeypatch, capsys, "inspect", path, "--plot", tmp_path / f"{LONG}.png")
    assert code == 2
    assert "too long" in one_line_error(err)


def test_check_output_path_accepts_an_ordinary_name(tmp_path):
    assert check_output_path(tmp_path / "a.wav") == tmp_path / "a.wav"


# --------------------------------------------------------------------------- custom formats


def test_custom_format_mapping_codes_onto_surrogates_is_refused_at_parse_time():
    with pytest.raises(FormatError, match="surrogate"):
        parse_format("custom:bits=5,start=0x0B,end=0x0F,offset=0xD800")


@pytest.mark.parametrize("offset, ok", [(0xD7E0, True), (0xD7E1, False), (0xDFFF, False), (0xE000, True)])
def test_custom_format_offsets_beside_the_surrogates(offset, ok):
    spec = f"custom:bits=5,start=0x0B,end=0x0F,offset={offset:#x}"
    if ok:
        fmt = parse_format(spec)
        text = "".join(chr(fmt.offset + c) for c in range(32))
        text.encode("utf-8")                        # every character it can decode is printable
    else:
        with pytest.raises(FormatError):
            parse_format(spec)


# --------------------------------------------------------------------------- faults in the data


def test_one_sample_of_1e308_is_repaired_reported_and_the_card_reads(swipe):
    x, rate = swipe
    bad = x.copy()
    bad[5000] = 1e308
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        result = decode_channel(bad, rate, source="card.wav")
    kinds = [w.category for w in caught]
    assert kinds == [NonPhysicalSampleWarning], [str(w.message) for w in caught]   # no numpy warnings
    message = str(caught[0].message)
    assert "1 non-physical sample" in message and "sample 5000" in message and "\n" not in message
    assert result.outliers.tolist() == [5000]
    assert [r.frame.text for r in result.reads if r.valid] == [TEXT]


def test_a_burst_of_wild_samples_is_counted_with_its_first_and_last_position(swipe):
    x, rate = swipe
    bad = x.copy()
    bad[3000:3010] = -1e200
    y, where = repair_outliers(bad)
    assert where.tolist() == list(range(3000, 3010))
    assert np.all(np.abs(y[3000:3010]) <= np.abs(x).max())


@pytest.mark.parametrize("snr_db", [20.0, 90.0])
def test_a_clean_recording_has_no_outliers_even_at_90_db_snr(snr_db):
    cap, _ = synth_capture({1: TEXT}, imp=Impairments(snr_db=snr_db), seed=4)
    y, where = repair_outliers(cap.channel(0))
    assert where.size == 0
    assert y is cap.channel(0) or np.array_equal(y, cap.channel(0))


def test_inspect_of_a_capture_with_a_wild_sample_prints_one_warning_line(tmp_path, swipe, monkeypatch, capsys):
    x, rate = swipe
    bad = x.copy()
    bad[5000] = 1e308
    path = tmp_path / "wild.wav"
    sf.write(path, bad, int(rate), subtype="DOUBLE")
    code, out, err = run_cli(monkeypatch, capsys, "inspect", path)
    assert code == 0
    lines = [ln for ln in err.splitlines() if ln.strip()]
    assert len(lines) == 1 and lines[0].startswith("readchan: warning:") and "sample 5000" in lines[0]


# --------------------------------------------------------------------------- truncated files


def _cut(path: Path, keep_bytes: int) -> Path:
    cut = path.with_name("cut-" + path.name)
    cut.write_bytes(path.read_bytes()[:keep_bytes])
    return cut


def test_truncated_wav_decodes_what_is_there_with_one_warning_line_and_the_reads_exit_code(
        tmp_path, swipe, monkeypatch, capsys):
    x, rate = swipe
    whole = write_capture(tmp_path / "card.wav", x, rate, kind="wav16")
    cut = _cut(whole, whole.stat().st_size - 400)        # the trailing quiet time is cut off
    code, out, err = run_cli(monkeypatch, capsys, "decode", cut)
    assert code == 0                                       # the read is whole and valid
    lines = [ln for ln in err.splitlines() if ln.strip()]
    assert len(lines) == 1 and lines[0].startswith("readchan: warning:") and "truncated" in lines[0]


def test_wav_truncated_inside_the_read_exits_1_like_any_incomplete_read(tmp_path, swipe, monkeypatch, capsys):
    x, rate = swipe
    whole = write_capture(tmp_path / "card.wav", x, rate, kind="wav16")
    cut = _cut(whole, 44 + 2 * int(0.15 * rate))          # 0.15 s: inside the swipe
    code, _, err = run_cli(monkeypatch, capsys, "decode", cut)
    assert code == 1
    assert err.count("readchan: warning:") == 1 and "truncated" in err


@pytest.mark.parametrize("fmt, subtype", [("AIFF", "PCM_16"), ("FLAC", "PCM_16")])
def test_truncated_aiff_and_flac_load_what_is_there_with_a_warning(tmp_path, swipe, fmt, subtype):
    x, rate = swipe
    path = tmp_path / f"card.{fmt.lower()}"
    sf.write(path, x, int(rate), subtype=subtype, format=fmt)
    cut = _cut(path, path.stat().st_size // 2)
    with pytest.warns(TruncatedCaptureWarning, match="truncated"):
        cap = load_capture(cut)
    assert 0 < cap.n_samples < x.size
    np.testing.assert_allclose(cap.channel(0), x[:cap.n_samples], atol=2.0 ** -14)


# --------------------------------------------------------------------------- file names


def _bytes_name(tmp_path: Path, name: bytes) -> str:
    path = os.path.join(os.fsencode(tmp_path), name)
    try:
        open(path, "wb").close()
    except OSError:
        pytest.skip("this file system refuses names that are not UTF-8")
    return os.fsdecode(path)


@pytest.mark.parametrize("ext, subtype", [(b".wav", "PCM_16"), (b".flac", "PCM_24")])
def test_audio_file_whose_name_is_not_utf8_opens_by_its_bytes(tmp_path, swipe, ext, subtype):
    x, rate = swipe
    name = _bytes_name(tmp_path, b"caf\xe9" + ext)
    with open(name, "wb") as fh:
        sf.write(fh, x, int(rate), subtype=subtype, format=ext[1:].decode().upper())
    cap = load_capture(name)
    assert cap.n_samples == x.size
    assert load_capture(os.fsencode(name)).n_samples == x.size
    assert [r.frame.text for r in reads_of(decode_capture(cap)) if r.valid] == [TEXT]


def test_error_about_a_name_that_is_not_utf8_is_printable(tmp_path):
    name = _bytes_name(tmp_path, b"caf\xe9.wav")
    with pytest.raises(CaptureError) as e:
        load_capture(name)                                 # an empty file
    message = str(e.value)
    message.encode("utf-8")
    assert "caf\\xe9.wav" in message


# --------------------------------------------------------------------------- channels without activity


@pytest.mark.parametrize("make", [lambda rng: np.zeros(20_000), lambda rng: np.full(20_000, 0.3),
                                  lambda rng: rng.normal(0.0, 1e-3, 20_000),
                                  lambda rng: np.round(rng.normal(0.0, 2.0, 20_000)) / 32768])
def test_a_channel_of_white_noise_or_a_constant_is_reported_as_no_activity_without_detection(make):
    result = decode_channel(make(np.random.default_rng(7)), 48_000.0)
    assert len(result.transitions) == 0 and result.reads == ()
    assert result.status.state == "no-activity"


@pytest.mark.parametrize("track, text", [(1, TEXT), (2, ";9912345678901239=29121010000000000?")])
def test_a_weak_swipe_in_a_long_noise_capture_is_not_taken_for_noise(track, text):
    # 6 dB SNR, below where decoding fails (README, Benchmarks): the swipe still raises the RMS
    from readchan.frontend.head import only_white_noise

    for seed in range(3):
        cap, _ = synth_capture({track: text}, imp=Impairments(snr_db=6.0), seed=seed, lead_s=1.0)
        assert not only_white_noise(cap.channel(0), cap.rate_hz)


def test_band_limited_noise_is_decoded_in_full_not_called_white():
    from readchan.frontend.head import only_white_noise

    x = np.convolve(np.random.default_rng(2).normal(size=20_000), np.ones(4) / 4, "same")
    assert not only_white_noise(x, 48_000.0)


def test_settings_are_still_checked_against_nyquist_on_a_noise_channel():
    with pytest.raises(ParameterError, match="Nyquist"):
        decode_channel(np.zeros(20_000), 48_000.0, DecodeSettings(condition=ConditionSettings(lowpass_hz=30_000.0)))


def test_a_wide_capture_of_noise_columns_still_reads_its_swipe(swipe):
    x, rate = swipe
    cols = np.round(np.random.default_rng(3).normal(0.0, 2.0, (x.size, 40))) / 32768
    cols[:, 0] = x
    results = decode_capture(Capture(cols, rate))
    assert [r.frame.text for r in reads_of(results) if r.valid] == [TEXT]
    assert [ch.status.state for ch in results[1:]] == ["no-activity"] * 39


def test_sweep_plot_with_a_300_character_name_is_refused_before_the_trials(tmp_path, monkeypatch, capsys):
    code, out, err = run_cli(monkeypatch, capsys, "sweep", "jitter", "--values", "0,0.1", "--trials", "1",
                             "--plot", tmp_path / f"{LONG}.png")
    assert code == 2 and out == ""
    assert "too long" in one_line_error(err)


@pytest.mark.parametrize("file_type", ["wav16", "flac"])
def test_synth_writes_audio_to_a_name_that_is_not_utf8(tmp_path, monkeypatch, capsys, file_type):
    name = _bytes_name(tmp_path, b"out\xe9." + (b"wav" if file_type == "wav16" else b"flac"))
    code, _, err = run_cli(monkeypatch, capsys, "synth", name, "--track1", TEXT, "--file-type", file_type, "--force")
    assert code == 0, err
    assert "out\\xe9" in err
    assert [r.frame.text for r in reads_of(decode_capture(load_capture(name))) if r.valid] == [TEXT]


def test_json_source_of_a_name_that_is_not_utf8_is_escaped_text(tmp_path, swipe, monkeypatch, capsys):
    x, rate = swipe
    name = _bytes_name(tmp_path, b"caf\xe9.wav")
    with open(name, "wb") as fh:
        sf.write(fh, x, int(rate), subtype="PCM_16", format="WAV")
    code, out, _ = run_cli(monkeypatch, capsys, "decode", "--json", "--no-field-check", name)
    out.encode("utf-8")                     # no lone surrogate: a strict UTF-8 consumer can read it
    sources = {r["source"] for r in json.loads(out)["reads"]}
    assert sources == {display_path(name)} and sources.pop().endswith("caf\\xe9.wav")
