"""Specification of capture I/O: what loads, what is refused and how, and how files are written."""

from __future__ import annotations

import warnings
from pathlib import Path

import numpy as np
import pytest
import soundfile as sf

from readchan.io.audio import TruncatedCaptureWarning
from readchan.io.capture import Capture, load_capture
from readchan.io.checks import MIN_SAMPLES
from readchan.io.write import WRITE_KINDS, ClippingWarning, write_capture
from readchan.errors import CaptureError, ParameterError

RATE = 48_000
N = 1_000


def tone(n: int = N, channels: int = 1, amplitude: float = 0.8) -> np.ndarray:
    """An invented test signal: a few sines of different phase, shape (n, channels)."""
    i = np.arange(n)[:, None]
    return amplitude * np.sin(2 * np.pi * i / 37.0 + np.arange(channels)[None, :])


def assert_one_line_error(excinfo: pytest.ExceptionInfo, *fragments: str) -> None:
    message = str(excinfo.value)
    assert message, "error message is empty"
    assert "\n" not in message
    for fragment in fragments:
        assert fragment in message, f"{fragment!r} not in {message!r}"


def write_text(path: Path, text: str) -> Path:
    path.write_text(text, encoding="utf-8")
    return path


def csv_rows(times, values, delim: str = ",") -> str:
    return "".join(delim.join([f"{t:.9g}", *(f"{v:.9g}" for v in row)]) + "\n"
                   for t, row in zip(times, np.atleast_2d(values)))


# --------------------------------------------------------------------------- audio round trips


@pytest.mark.parametrize("subtype, tolerance", [
    ("PCM_16", 2.0 ** -15),
    ("PCM_24", 2.0 ** -23),
    ("PCM_32", 2.0 ** -31),
    ("FLOAT", 1e-7),
])
def test_wav_of_every_subtype_loads_in_full_scale(tmp_path, subtype, tolerance):
    signal = tone()
    path = tmp_path / f"head_{subtype}.wav"
    sf.write(path, signal, RATE, subtype=subtype)
    cap = load_capture(path)
    assert cap.samples.dtype == np.float64
    assert cap.samples.shape == (N, 1)
    assert cap.samples.flags["C_CONTIGUOUS"]
    assert cap.rate_hz == RATE
    assert cap.units == "FS"
    np.testing.assert_allclose(cap.samples, signal, atol=tolerance)


def test_flac_loads(tmp_path):
    signal = tone(channels=2)
    path = tmp_path / "head.flac"
    sf.write(path, signal, 96_000, subtype="PCM_24")
    cap = load_capture(path)
    assert cap.rate_hz == 96_000
    np.testing.assert_allclose(cap.samples, signal, atol=2.0 ** -23)


def test_aiff_loads(tmp_path):
    signal = tone()
    path = tmp_path / "head.aiff"
    sf.write(path, signal, 44_100, subtype="PCM_16")
    cap = load_capture(path)
    assert cap.rate_hz == 44_100
    np.testing.assert_allclose(cap.samples, signal, atol=2.0 ** -15)


def test_three_channel_wav_keeps_channel_order(tmp_path):
    signal = tone(channels=3)
    path = tmp_path / "three.wav"
    sf.write(path, signal, RATE, subtype="FLOAT")
    cap = load_capture(path)
    assert cap.n_channels == 3
    assert cap.channel_names == ("ch0", "ch1", "ch2")
    for k in range(3):
        np.testing.assert_allclose(cap.channel(k), signal[:, k], atol=1e-7)


def test_source_is_the_path_as_given(tmp_path):
    path = tmp_path / "head.wav"
    sf.write(path, tone(), RATE)
    assert load_capture(str(path)).source == str(path)
    assert load_capture(path).source == str(path)


def test_audio_with_unknown_extension_is_recognised_by_content(tmp_path):
    path = tmp_path / "head.capture"
    sf.write(path, tone(), RATE, format="WAV", subtype="PCM_16")
    assert load_capture(path).n_samples == N


def test_audio_rate_disagreeing_with_given_rate_is_refused(tmp_path):
    path = tmp_path / "head.wav"
    sf.write(path, tone(), RATE)
    with pytest.raises(CaptureError) as excinfo:
        load_capture(path, rate_hz=44_100)
    assert_one_line_error(excinfo, str(path), "48000", "44100")


# --------------------------------------------------------------------------- Capture object


def test_capture_properties():
    cap = Capture(samples=np.zeros((500, 2)), rate_hz=1000.0, source="mem")
    assert (cap.n_samples, cap.n_channels) == (500, 2)
    assert cap.duration_s == pytest.approx(0.5)
    assert cap.channel_names == ("ch0", "ch1")


def test_capture_is_frozen_and_its_samples_read_only():
    cap = Capture(samples=np.zeros((100, 1)), rate_hz=1000.0)
    with pytest.raises(AttributeError):
        cap.rate_hz = 5.0  # type: ignore[misc]
    with pytest.raises(ValueError):
        cap.samples[0, 0] = 1.0


def test_capture_channel_is_a_one_dimensional_view():
    cap = Capture(samples=np.arange(30.0).reshape(10, 3), rate_hz=10.0)
    ch = cap.channel(1)
    assert ch.shape == (10,)
    assert np.shares_memory(ch, cap.samples)
    np.testing.assert_array_equal(ch, np.arange(1.0, 30.0, 3.0))


@pytest.mark.parametrize("index", [3, -1, 1.0])
def test_capture_channel_out_of_range_names_the_valid_range(index):
    cap = Capture(samples=np.zeros((10, 3)), rate_hz=10.0, source="mem")
    with pytest.raises(CaptureError) as excinfo:
        cap.channel(index)  # type: ignore[arg-type]
    assert_one_line_error(excinfo, "mem")
    if isinstance(index, int):
        assert "0..2" in str(excinfo.value)


@pytest.mark.parametrize("rate", [0.0, -1.0, float("nan"), float("inf")])
def test_capture_with_absurd_rate_is_a_parameter_error(rate):
    with pytest.raises(ParameterError):
        Capture(samples=np.zeros((10, 1)), rate_hz=rate)


@pytest.mark.parametrize("samples", [np.zeros((2, 2, 2)), np.zeros((0, 1)), np.array([[0.0], [np.nan]])])
def test_capture_with_wrong_shape_or_nonfinite_samples_is_refused(samples):
    with pytest.raises(CaptureError) as excinfo:
        Capture(samples=samples, rate_hz=10.0, source="mem")
    assert_one_line_error(excinfo, "mem")


# --------------------------------------------------------------------------- text tables


@pytest.mark.parametrize("delim", [",", ";", "\t", " ", "  "])
def test_csv_with_each_delimiter_loads(tmp_path, delim):
    values = tone(200, channels=2)
    times = np.arange(200) / 10_000.0
    path = write_text(tmp_path / "scope.csv", csv_rows(times, values, delim))
    cap = load_capture(path)
    assert cap.n_channels == 2
    assert cap.rate_hz == pytest.approx(10_000.0, rel=1e-9)
    np.testing.assert_allclose(cap.samples, values, rtol=1e-8, atol=1e-12)


def test_tsv_and_txt_extensions_are_text(tmp_path):
    body = csv_rows(np.arange(50) * 1e-3, tone(50), "\t")
    for name in ("log.tsv", "log.txt"):
        assert load_capture(write_text(tmp_path / name, body)).rate_hz == pytest.approx(1000.0)


def test_scope_export_with_comments_metadata_and_header(tmp_path):
    values = tone(300, channels=2)
    times = np.arange(300) * 2e-6
    text = ("# Invented bench scope, firmware 0.0\n"
            "; exported for testing\n"
            "% acquisition: single\n"
            "// probe x10\n"
            "Record Length,300\n"
            "Sample Interval,2e-06\n"
            "\n"
            "Time (s),CH1 (V),CH2 (V)\n") + csv_rows(times, values)
    cap = load_capture(write_text(tmp_path / "bench.csv", text))
    assert cap.channel_names == ("CH1", "CH2")
    assert cap.units == "V"
    assert cap.rate_hz == pytest.approx(500_000.0, rel=1e-9)
    np.testing.assert_allclose(cap.samples, values, rtol=1e-8, atol=1e-12)


def test_unit_in_square_brackets_becomes_units(tmp_path):
    text = "t,Volt [mV]\n" + csv_rows(np.arange(40) * 1e-4, tone(40))
    cap = load_capture(write_text(tmp_path / "mv.csv", text))
    assert cap.units == "mV"
    assert cap.channel_names == ("Volt",)


def test_time_in_milliseconds_is_converted_to_seconds(tmp_path):
    text = "Time (ms),Signal\n" + csv_rows(np.arange(40) * 0.5, tone(40))
    assert load_capture(write_text(tmp_path / "ms.csv", text)).rate_hz == pytest.approx(2000.0)


def test_time_column_may_start_at_a_negative_time(tmp_path):
    times = -0.01 + np.arange(400) * 5e-5
    path = write_text(tmp_path / "pretrigger.csv", "time,head\n" + csv_rows(times, tone(400)))
    cap = load_capture(path)
    assert cap.rate_hz == pytest.approx(20_000.0, rel=1e-9)
    assert cap.n_samples == 400


def test_headerless_increasing_first_column_is_time(tmp_path):
    values = tone(100, channels=3)
    path = write_text(tmp_path / "bare.csv", csv_rows(np.arange(100) * 1e-5, values))
    cap = load_capture(path)
    assert cap.n_channels == 3
    assert cap.rate_hz == pytest.approx(100_000.0, rel=1e-9)


def test_rate_recovered_from_coarsely_printed_times(tmp_path):
    # 1/3 ms steps printed with 4 decimals: rounding error up to 0.15 of a period.
    times = np.round(np.arange(MIN_SAMPLES * 10) / 3000.0, 4)
    path = write_text(tmp_path / "rounded.csv", "".join(f"{t:.4f},{v:.3f}\n" for t, v in zip(times, tone(160)[:, 0])))
    assert load_capture(path).rate_hz == pytest.approx(3000.0, rel=1e-3)


def test_values_without_time_column_need_and_use_the_given_rate(tmp_path):
    values = tone(100)
    path = write_text(tmp_path / "mono.csv", "".join(f"{v:.9g}\n" for v in values[:, 0]))
    cap = load_capture(path, rate_hz=250_000)
    assert cap.rate_hz == 250_000
    assert cap.n_channels == 1
    np.testing.assert_allclose(cap.samples, values, rtol=1e-8)


def test_with_rate_given_a_headerless_first_column_is_a_channel(tmp_path):
    values = np.c_[np.arange(50.0), tone(50)]
    path = write_text(tmp_path / "two.csv", "".join(f"{a:.9g},{b:.9g}\n" for a, b in values))
    cap = load_capture(path, rate_hz=1000)
    assert cap.n_channels == 2


def test_time_column_false_treats_every_column_as_a_channel(tmp_path):
    text = "time,head\n" + csv_rows(np.arange(40) * 1e-3, tone(40))
    cap = load_capture(write_text(tmp_path / "forced.csv", text), rate_hz=1000, time_column=False)
    assert cap.n_channels == 2


def test_given_rate_agreeing_with_time_column_is_used(tmp_path):
    path = write_text(tmp_path / "agree.csv", "time,x\n" + csv_rows(np.arange(40) * 1e-3, tone(40)))
    assert load_capture(path, rate_hz=1004.0).rate_hz == 1004.0


def test_given_rate_disagreeing_with_time_column_is_refused(tmp_path):
    path = write_text(tmp_path / "disagree.csv", "time,x\n" + csv_rows(np.arange(40) * 1e-3, tone(40)))
    with pytest.raises(CaptureError) as excinfo:
        load_capture(path, rate_hz=1100.0)
    assert_one_line_error(excinfo, str(path), "1 %")


def test_trailing_delimiter_is_ignored(tmp_path):
    text = "time,CH1,\n" + "".join(f"{i * 1e-3:.9g},{i % 3},\n" for i in range(40))
    cap = load_capture(write_text(tmp_path / "trailing.csv", text))
    assert cap.n_channels == 1
    np.testing.assert_array_equal(cap.channel(0), np.arange(40) % 3)


def test_windows_line_endings_and_quoted_fields_load(tmp_path):
    text = '"Time","CH1"\r\n' + "".join(f'"{i * 1e-3:.9g}","{i}"\r\n' for i in range(40))
    cap = load_capture(write_text(tmp_path / "quoted.csv", text))
    assert cap.channel_names == ("CH1",)
    np.testing.assert_array_equal(cap.channel(0), np.arange(40.0))


def test_latin1_text_loads(tmp_path):
    path = tmp_path / "latin.csv"
    text = "# Messkopf \xb5V\nTime,Kopf\n" + csv_rows(np.arange(40) * 1e-3, tone(40))
    path.write_bytes(text.encode("latin-1"))
    assert load_capture(path).n_samples == 40


def test_large_csv_loads_every_row_in_order(tmp_path):
    # the parsing speed is measured by scripts/bench_capture.py, not here (no clock in tests)
    n = 200_000
    values = tone(n)[:, 0]
    path = write_capture(tmp_path / "big.csv", values, 1e6, kind="csv")
    cap = load_capture(path)
    assert cap.n_samples == n
    assert cap.rate_hz == pytest.approx(1e6, rel=1e-9)
    np.testing.assert_allclose(cap.channel(0), values, rtol=1e-8, atol=1e-9)


# --------------------------------------------------------------------------- bad input


def test_missing_file_is_refused(tmp_path):
    path = tmp_path / "absent.wav"
    with pytest.raises(CaptureError) as excinfo:
        load_capture(path)
    assert_one_line_error(excinfo, str(path), "no such file")


def test_directory_is_refused(tmp_path):
    with pytest.raises(CaptureError) as excinfo:
        load_capture(tmp_path)
    assert_one_line_error(excinfo, str(tmp_path), "directory")


@pytest.mark.parametrize("name", ["empty.wav", "empty.csv", "empty.bin"])
def test_empty_file_is_refused(tmp_path, name):
    path = tmp_path / name
    path.write_bytes(b"")
    with pytest.raises(CaptureError) as excinfo:
        load_capture(path)
    assert_one_line_error(excinfo, str(path), "empty")


def test_wav_cut_inside_its_header_is_refused(tmp_path):
    whole = tmp_path / "whole.wav"
    sf.write(whole, tone(), RATE, subtype="PCM_16")
    for cut in (4, 20, 30):
        path = tmp_path / f"cut{cut}.wav"
        path.write_bytes(whole.read_bytes()[:cut])
        with pytest.raises(CaptureError) as excinfo:
            load_capture(path)
        assert_one_line_error(excinfo, str(path), "truncated")


def test_wav_cut_mid_data_loads_the_samples_present_with_a_warning(tmp_path):
    whole = tmp_path / "whole.wav"
    signal = tone()
    sf.write(whole, signal, RATE, subtype="PCM_16")
    data = whole.read_bytes()
    path = tmp_path / "cut.wav"
    path.write_bytes(data[: len(data) // 2 + 1])      # also cuts one sample in half
    with pytest.warns(TruncatedCaptureWarning, match="truncated"):
        cap = load_capture(path)
    assert MIN_SAMPLES <= cap.n_samples < N
    np.testing.assert_allclose(cap.samples, signal[: cap.n_samples], atol=2.0 ** -15)


def test_wav_cut_right_after_its_header_is_refused_as_too_short(tmp_path):
    whole = tmp_path / "whole.wav"
    sf.write(whole, tone(), RATE, subtype="PCM_16")
    path = tmp_path / "cut.wav"
    path.write_bytes(whole.read_bytes()[:44 + 2 * 3])
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", TruncatedCaptureWarning)
        with pytest.raises(CaptureError) as excinfo:
            load_capture(path)
    assert_one_line_error(excinfo, str(path), "3 samples", "truncated")


@pytest.mark.parametrize("n", [0, 1, MIN_SAMPLES - 1])
def test_audio_with_too_few_samples_is_refused(tmp_path, n):
    path = tmp_path / "short.wav"
    sf.write(path, np.zeros(n), RATE)
    with pytest.raises(CaptureError) as excinfo:
        load_capture(path)
    assert_one_line_error(excinfo, str(path), f"{n} samples")


def test_audio_with_exactly_min_samples_loads(tmp_path):
    path = tmp_path / "short.wav"
    sf.write(path, np.zeros(MIN_SAMPLES), RATE)
    assert load_capture(path).n_samples == MIN_SAMPLES


@pytest.mark.parametrize("bad", [np.nan, np.inf])
def test_float_wav_with_nonfinite_sample_is_refused(tmp_path, bad):
    signal = tone()
    signal[123, 0] = bad
    path = tmp_path / "bad.wav"
    sf.write(path, signal, RATE, subtype="FLOAT")
    with pytest.raises(CaptureError) as excinfo:
        load_capture(path)
    assert_one_line_error(excinfo, str(path), "sample 123")


def test_binary_garbage_is_refused(tmp_path):
    path = tmp_path / "noise.bin"
    path.write_bytes(bytes(range(256)) * 8)
    with pytest.raises(CaptureError) as excinfo:
        load_capture(path)
    assert_one_line_error(excinfo, str(path), "text table")


def test_csv_with_no_numbers_is_refused(tmp_path):
    path = write_text(tmp_path / "words.csv", "# notes\nname,value\nalpha,beta\n")
    with pytest.raises(CaptureError) as excinfo:
        load_capture(path)
    assert_one_line_error(excinfo, str(path), "no numeric data")


@pytest.mark.parametrize("rows", [0, 1, MIN_SAMPLES - 1])
def test_csv_with_too_few_rows_is_refused(tmp_path, rows):
    text = "time,x\n" + csv_rows(np.arange(rows) * 1e-3, tone(rows)) if rows else "time,x\n"
    path = write_text(tmp_path / "short.csv", text)
    with pytest.raises(CaptureError) as excinfo:
        load_capture(path)
    assert_one_line_error(excinfo, str(path))


def test_csv_row_with_wrong_number_of_fields_names_the_line(tmp_path):
    lines = [f"{i * 1e-3:.9g},{i}" for i in range(40)]
    lines[25] += ",7"
    path = write_text(tmp_path / "ragged.csv", "time,x\n" + "\n".join(lines) + "\n")
    with pytest.raises(CaptureError) as excinfo:
        load_capture(path)
    assert_one_line_error(excinfo, str(path), "line 27", "3 fields")


def test_csv_row_with_missing_field_names_the_line(tmp_path):
    lines = [f"{i * 1e-3:.9g},{i},{i}" for i in range(40)]
    lines[10] = f"{10e-3:.9g},10"
    path = write_text(tmp_path / "short_row.csv", "\n".join(lines) + "\n")
    with pytest.raises(CaptureError) as excinfo:
        load_capture(path)
    assert_one_line_error(excinfo, str(path), "line 11")


@pytest.mark.parametrize("bad", ["nan", "NaN", "inf", "-inf", "1e999", ""])
def test_csv_row_with_nonfinite_or_empty_value_names_the_line(tmp_path, bad):
    lines = [f"{i * 1e-3:.9g},{i}" for i in range(40)]
    lines[30] = f"{30e-3:.9g},{bad}"
    path = write_text(tmp_path / "holes.csv", "# x\ntime,x\n" + "\n".join(lines) + "\n")
    with pytest.raises(CaptureError) as excinfo:
        load_capture(path)
    assert_one_line_error(excinfo, str(path), "line 33")


def test_csv_with_text_among_the_data_names_the_line(tmp_path):
    lines = [f"{i * 1e-3:.9g},{i}" for i in range(40)]
    lines[5] = "0.005,oops"
    path = write_text(tmp_path / "oops.csv", "\n".join(lines) + "\n")
    with pytest.raises(CaptureError) as excinfo:
        load_capture(path)
    assert_one_line_error(excinfo, str(path), "line 6", "'oops'")


def test_non_uniform_time_column_is_refused_naming_the_row(tmp_path):
    times = np.arange(100) * 1e-3
    times[60:] += 2e-3                                    # a gap of two periods
    path = write_text(tmp_path / "gap.csv", "time,x\n" + csv_rows(times, tone(100)))
    with pytest.raises(CaptureError) as excinfo:
        load_capture(path)
    assert_one_line_error(excinfo, str(path), "not uniformly sampled", "largest deviation", "at row")


def test_time_column_with_one_dropped_row_is_refused(tmp_path):
    lines = [f"{i * 1e-3:.9g},{i}" for i in range(40)]
    del lines[20]
    path = write_text(tmp_path / "dropped.csv", "time,x\n" + "\n".join(lines) + "\n")
    with pytest.raises(CaptureError) as excinfo:
        load_capture(path)
    assert_one_line_error(excinfo, str(path), "not uniformly sampled", "line 22")


def test_whitespace_separated_header_keeps_units_with_their_names(tmp_path):
    text = "Time CH1 (V) CH2 (V)\n" + "".join(f"{i * 1e-3:.9g} {i} {-i}\n" for i in range(40))
    cap = load_capture(write_text(tmp_path / "spaced.txt", text))
    assert cap.channel_names == ("CH1", "CH2")
    assert cap.units == "V"


def test_decreasing_time_column_is_refused(tmp_path):
    path = write_text(tmp_path / "back.csv", "time,x\n" + csv_rows(-np.arange(40) * 1e-3, tone(40)))
    with pytest.raises(CaptureError) as excinfo:
        load_capture(path)
    assert_one_line_error(excinfo, str(path), "time column")


def test_single_column_without_rate_asks_for_rate(tmp_path):
    path = write_text(tmp_path / "mono.csv", "".join(f"{v:.6f}\n" for v in tone(50)[:, 0]))
    with pytest.raises(CaptureError) as excinfo:
        load_capture(path)
    assert_one_line_error(excinfo, str(path), "pass rate_hz")


def test_columns_without_time_and_without_rate_ask_for_rate(tmp_path):
    path = write_text(tmp_path / "pair.csv", "".join(f"{a:.6f},{b:.6f}\n" for a, b in tone(50, channels=2)))
    with pytest.raises(CaptureError) as excinfo:
        load_capture(path)
    assert_one_line_error(excinfo, str(path), "pass rate_hz")


def test_time_column_alone_is_refused(tmp_path):
    path = write_text(tmp_path / "clock.csv", "time\n" + "".join(f"{i * 1e-3}\n" for i in range(40)))
    with pytest.raises(CaptureError) as excinfo:
        load_capture(path)
    assert_one_line_error(excinfo, str(path), "no value columns")


@pytest.mark.parametrize("rate", [0, -48_000, float("nan"), float("inf")])
def test_absurd_given_rate_is_a_parameter_error(tmp_path, rate):
    path = write_text(tmp_path / "mono.csv", "".join(f"{v:.6f}\n" for v in tone(50)[:, 0]))
    with pytest.raises(ParameterError) as excinfo:
        load_capture(path, rate_hz=rate)
    assert "\n" not in str(excinfo.value)


# --------------------------------------------------------------------------- writing


@pytest.mark.parametrize("kind, suffix, tolerance", [
    ("wav16", ".wav", 2.0 ** -15),
    ("wav24", ".wav", 2.0 ** -23),
    ("wav-float", ".wav", 1e-7),
    ("flac", ".flac", 2.0 ** -23),
    ("csv", ".csv", 1e-8),
])
def test_every_kind_round_trips(tmp_path, kind, suffix, tolerance):
    assert kind in WRITE_KINDS
    signal = tone(channels=2)
    path = write_capture(tmp_path / f"out{suffix}", signal, RATE, kind=kind)
    assert path == tmp_path / f"out{suffix}"
    cap = load_capture(path)
    assert cap.n_channels == 2
    assert cap.rate_hz == pytest.approx(RATE, rel=1e-9)
    np.testing.assert_allclose(cap.samples, signal, atol=tolerance)


def test_mono_samples_write_one_channel(tmp_path):
    path = write_capture(tmp_path / "mono.wav", tone()[:, 0], RATE)
    assert load_capture(path).n_channels == 1


def test_csv_header_uses_given_channel_names(tmp_path):
    path = write_capture(tmp_path / "named.csv", tone(channels=2), 1e5, kind="csv",
                         channel_names=("head", "reference"))
    assert path.read_text().splitlines()[0] == "time_s,head,reference"
    assert load_capture(path).channel_names == ("head", "reference")


def test_csv_default_header_and_time_column(tmp_path):
    path = write_capture(tmp_path / "plain.csv", tone(channels=2), 1000.0, kind="csv")
    lines = path.read_text().splitlines()
    assert lines[0] == "time_s,ch0,ch1"
    assert lines[2].split(",")[0] == "0.001"


def test_csv_at_non_integer_rate_round_trips(tmp_path):
    path = write_capture(tmp_path / "odd.csv", tone(), 12_345.678, kind="csv")
    assert load_capture(path).rate_hz == pytest.approx(12_345.678, rel=1e-9)


@pytest.mark.parametrize("kind", ["wav16", "wav24", "flac"])
def test_pcm_kinds_clip_with_a_warning(tmp_path, kind):
    signal = tone(amplitude=1.5)
    suffix = ".flac" if kind == "flac" else ".wav"
    with pytest.warns(ClippingWarning, match="clipped"):
        path = write_capture(tmp_path / f"loud{suffix}", signal, RATE, kind=kind)
    cap = load_capture(path)
    assert cap.samples.max() <= 1.0 and cap.samples.min() >= -1.0
    assert cap.samples.max() > 0.99


def test_clipping_leaves_the_callers_array_untouched(tmp_path):
    signal = tone(amplitude=1.5)
    before = signal.copy()
    with pytest.warns(ClippingWarning):
        write_capture(tmp_path / "loud.wav", signal, RATE)
    np.testing.assert_array_equal(signal, before)


def test_float_wav_keeps_values_beyond_full_scale(tmp_path):
    signal = tone(amplitude=1.5)
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        path = write_capture(tmp_path / "loud.wav", signal, RATE, kind="wav-float")
    np.testing.assert_allclose(load_capture(path).samples, signal, atol=1e-6)


def test_existing_file_is_not_overwritten_without_force(tmp_path):
    path = tmp_path / "keep.wav"
    path.write_bytes(b"precious")
    with pytest.raises(CaptureError) as excinfo:
        write_capture(path, tone(), RATE)
    assert_one_line_error(excinfo, str(path), "exists; pass force=True to overwrite")
    assert path.read_bytes() == b"precious"


def test_force_replaces_an_existing_file(tmp_path):
    path = tmp_path / "replace.wav"
    path.write_bytes(b"old")
    write_capture(path, tone(), RATE, force=True)
    assert load_capture(path).n_samples == N


def test_atomic_write_leaves_no_temporary_files(tmp_path):
    for kind, name in [("wav16", "a.wav"), ("flac", "b.flac"), ("csv", "c.csv")]:
        write_capture(tmp_path / name, tone(), RATE, kind=kind)
    write_capture(tmp_path / "a.wav", tone(), RATE, force=True)
    assert sorted(p.name for p in tmp_path.iterdir()) == ["a.wav", "b.flac", "c.csv"]


def test_failed_write_leaves_old_file_and_no_temporary_files(tmp_path):
    path = tmp_path / "keep.flac"
    path.write_bytes(b"precious")
    with pytest.raises(CaptureError):
        write_capture(path, tone(), 1_000_000, kind="flac", force=True)   # beyond what FLAC stores
    assert path.read_bytes() == b"precious"
    assert [p.name for p in tmp_path.iterdir()] == ["keep.flac"]


def test_write_into_missing_directory_is_refused(tmp_path):
    path = tmp_path / "nowhere" / "out.wav"
    with pytest.raises(CaptureError) as excinfo:
        write_capture(path, tone(), RATE)
    assert_one_line_error(excinfo, "does not exist")


@pytest.mark.parametrize("rate", [0, -1.0, float("nan"), float("inf"), "fast"])
def test_write_with_absurd_rate_is_a_parameter_error(tmp_path, rate):
    with pytest.raises(ParameterError):
        write_capture(tmp_path / "x.csv", tone(), rate, kind="csv")  # type: ignore[arg-type]
    assert not any(tmp_path.iterdir())


def test_audio_write_with_fractional_rate_is_refused(tmp_path):
    with pytest.raises(ParameterError) as excinfo:
        write_capture(tmp_path / "x.wav", tone(), 44_100.5)
    assert_one_line_error(excinfo, "44100.5")


def test_audio_write_with_nearly_integer_rate_rounds_it(tmp_path):
    path = write_capture(tmp_path / "x.wav", tone(), 47_999.99999)
    assert load_capture(path).rate_hz == RATE


@pytest.mark.parametrize("bad", [np.nan, np.inf])
def test_write_with_nonfinite_samples_is_a_parameter_error(tmp_path, bad):
    signal = tone()
    signal[7, 0] = bad
    with pytest.raises(ParameterError) as excinfo:
        write_capture(tmp_path / "x.wav", signal, RATE)
    assert_one_line_error(excinfo, "sample 7")
    assert not any(tmp_path.iterdir())


@pytest.mark.parametrize("samples", [np.zeros((2, 2, 2)), np.zeros(0), np.zeros((10, 0))])
def test_write_with_wrong_shape_is_a_parameter_error(tmp_path, samples):
    with pytest.raises(ParameterError):
        write_capture(tmp_path / "x.wav", samples, RATE)


def test_write_with_unknown_kind_is_a_parameter_error(tmp_path):
    with pytest.raises(ParameterError) as excinfo:
        write_capture(tmp_path / "x.mp3", tone(), RATE, kind="mp3")
    assert_one_line_error(excinfo, "wav16")


def test_write_with_kind_contradicting_extension_is_refused(tmp_path):
    with pytest.raises(ParameterError):
        write_capture(tmp_path / "x.wav", tone(), RATE, kind="csv")


def test_audio_kinds_ignore_channel_names(tmp_path):
    path = write_capture(tmp_path / "named.wav", tone(channels=2), RATE, channel_names=("a,b", "#c"))
    assert load_capture(path).n_channels == 2


@pytest.mark.parametrize("names", [("a",), ("a", "b,c"), ("1", "2"), ("a", "")])
def test_write_with_unusable_channel_names_is_a_parameter_error(tmp_path, names):
    with pytest.raises(ParameterError):
        write_capture(tmp_path / "x.csv", tone(channels=2), RATE, kind="csv", channel_names=names)
