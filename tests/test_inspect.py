"""Front-end diagnostics: measured quantities against synthesized truth, the verdict, the CLI and the plot.

Ground truth comes from the synthesizer (readchan.synth): SNR as 20·log10(median |peak| / noise
RMS) of the white noise it adds, PW50 = sqrt(g² + 4(d+a)²) of its Karlqvist pulse (Bertram,
*Theory of Magnetic Recording*, ch. 5), speed from its profile, hum at the frequency it adds.
The wavelength-response checks (Wallace spacing loss, gap loss) live in test_synth.py.
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest

from conftest import run_cli as run
from readchan.io.capture import Capture
from readchan.io.write import write_capture
from readchan.measure.diagnose import inspect_capture
from readchan.measure.pulse import isolated_pw50_cell
from readchan.errors import EXIT_BAD_INPUT, EXIT_INVALID, EXIT_NO_DATA, EXIT_VALID
from readchan.synth import Impairments, SpeedProfile
from readchan.synth.head import LorentzianPulse

from conftest import synth_capture

FIXTURES = Path(__file__).resolve().parent.parent / "fixtures"
T1 = "%B9912345678901239^QUILL/ODESSA M^2912101000000000000?"   # invented; the PAN passes Luhn
T2 = ";9912345678901239=29121010000000000?"


def _inspect(texts, **kw):
    cap, res = synth_capture(texts, **kw)
    reports = inspect_capture(cap)
    return reports, res


def _only_read(reports):
    reads = [r for ch in reports for r in ch.reads]
    assert len(reads) == 1
    return reads[0]




# --- measurements against synthesized truth --------------------------------------------------


@pytest.mark.parametrize("snr_db,track,seed", [(20.0, 1, 0), (30.0, 1, 1), (40.0, 2, 2)])
def test_snr_is_recovered_within_1_5_db(snr_db, track, seed):
    # SNR as the synthesizer defines it: 20·log10(median |peak| / RMS of its white noise).
    reports, _ = _inspect({track: T1 if track == 1 else T2}, imp=Impairments(snr_db=snr_db), seed=seed, lead_s=0.06)
    assert _only_read(reports).noise.snr_db == pytest.approx(snr_db, abs=1.5)


def test_noise_rms_is_measured_away_from_the_pulses():
    reports, res = _inspect({1: T1}, imp=Impairments(snr_db=25.0), lead_s=0.06)
    assert reports[0].front_end.noise_from == "quiet"
    assert reports[0].front_end.noise_rms == pytest.approx(res.noise_rms[0], rel=0.05)


@pytest.mark.parametrize("speed_cm_s,track", [(20.0, 1), (40.0, 1), (30.0, 2)])
def test_pw50_is_recovered_within_10_percent(speed_cm_s, track):
    # Karlqvist pulse over an arctan transition: PW50 = sqrt(g² + 4(d+a)²) in space (Bertram ch. 5);
    # in time, PW50 / speed.
    reports, res = _inspect({track: T1 if track == 1 else T2}, speed=SpeedProfile(speed_cm_s),
                            imp=Impairments(snr_db=30.0), seed=3)
    pulse = _only_read(reports).pulse
    assert pulse.pw50_s == pytest.approx(res.pw50_m / (speed_cm_s / 100), rel=0.10)
    assert pulse.pw50_m == pytest.approx(res.pw50_m, rel=0.10)


def test_pw50_of_a_wide_lorentzian_pulse_is_corrected_for_its_neighbours():
    # At 0.45 cell the clocking-zero neighbours narrow the measured width by about 10 %
    # (superposed Lorentzian pulses, the standard approximation); the report undoes that.
    cell_m = 0.0254 / 210
    pulse = LorentzianPulse(0.45 * cell_m)
    reports, res = _inspect({1: T1}, imp=Impairments(snr_db=35.0), pulse=pulse)
    p = _only_read(reports).pulse
    assert p.pw50_cell == pytest.approx(0.45, rel=0.05)
    assert p.width_cell < 0.93 * p.pw50_cell


def test_isolated_pw50_inverts_the_lorentzian_train_width():
    # A train of alternating Lorentzian pulses one cell apart, PW50 0.5 cell, measures 0.4407 cell
    # at half amplitude (computed by superposing 81 pulses; Lorentzian: standard approximation).
    assert isolated_pw50_cell(0.4407) == pytest.approx(0.5, abs=0.003)


@pytest.mark.parametrize("profile", [SpeedProfile(55.0), SpeedProfile(55.0, "swipe", 0.3)])
def test_mean_speed_is_recovered_within_3_percent(profile):
    # truth: the mean over bits of 2.54 / (210 bpi · true bit period), from the synthesizer's cell times
    reports, res = _inspect({1: T1}, speed=profile, imp=Impairments(snr_db=30.0))
    true_mean = float(np.mean(2.54 / (210.0 * np.diff(res.cell_times_s[0][0]))))
    assert _only_read(reports).timing.mean_speed_cm_s == pytest.approx(true_mean, rel=0.03)


@pytest.mark.parametrize("variation", [0.3, -0.3])
def test_a_ramp_gives_the_sign_of_its_acceleration(variation):
    # SpeedProfile "ramp": v0·(1 + r·(2u − 1)), accelerating for r > 0.
    reports, _ = _inspect({1: T1}, speed=SpeedProfile(30.0, "ramp", variation), imp=Impairments(snr_db=30.0))
    tm = _only_read(reports).timing
    assert np.sign(tm.mean_accel_m_s2) == np.sign(variation)
    assert abs(tm.mean_accel_m_s2) > 0.2


@pytest.mark.parametrize("hum_hz", [50.0, 60.0])
def test_mains_frequency_is_the_one_synthesized(hum_hz):
    reports, _ = _inspect({1: T1}, imp=Impairments(snr_db=30.0, hum_hz=hum_hz, hum_level=0.2), lead_s=0.1)
    fe = reports[0].front_end
    assert fe.mains_hz == hum_hz
    assert fe.hum_hz == pytest.approx(hum_hz, abs=0.5)


def test_hum_level_is_measured_relative_to_the_median_peak():
    # Impairments.hum_level: hum amplitude as a fraction of the median peak.
    reports, _ = _inspect({1: T1}, imp=Impairments(snr_db=35.0, hum_level=0.2), lead_s=0.1)
    assert _only_read(reports).noise.hum_ratio == pytest.approx(0.2, rel=0.15)


def test_clipping_is_counted_as_a_fraction_of_samples():
    reports, _ = _inspect({1: T1}, imp=Impairments(snr_db=35.0, clip=0.7))
    amp = _only_read(reports).amplitude
    assert amp.clipped_fraction > 0.001
    assert "clipped_fraction" in [c.limit.name for c in _only_read(reports).failed]


def test_an_unclipped_capture_has_no_clipped_samples():
    reports, _ = _inspect({1: T1}, imp=Impairments(snr_db=35.0))
    assert _only_read(reports).amplitude.clipped_fraction == 0.0


def test_symmetric_pulses_have_small_asymmetry():
    reports, _ = _inspect({1: T1}, imp=Impairments(snr_db=30.0))
    assert abs(_only_read(reports).amplitude.asymmetry_pct) < 3.0


def test_dc_offset_is_reported_in_capture_units():
    reports, _ = _inspect({1: T1}, imp=Impairments(snr_db=30.0, dc_offset=0.05))
    assert reports[0].front_end.dc_offset == pytest.approx(0.05, abs=0.005)


def test_jitter_lowers_the_worst_decision_margin():
    clean = _only_read(_inspect({1: T1}, imp=Impairments(snr_db=35.0))[0]).timing
    jittery = _only_read(_inspect({1: T1}, imp=Impairments(snr_db=35.0, jitter=0.1))[0]).timing
    assert jittery.margin_min < clean.margin_min - 0.2
    assert jittery.margin_p1 >= jittery.margin_min


def test_interval_histogram_counts_every_interval():
    tm = _only_read(_inspect({1: T1}, imp=Impairments(snr_db=30.0))[0]).timing
    assert int(tm.hist_counts.sum()) == tm.ratio.size


# --- verdict ----------------------------------------------------------------------------------


def test_verdict_names_low_snr_with_its_threshold():
    r = _only_read(_inspect({1: T1}, imp=Impairments(snr_db=14.0), lead_s=0.06)[0])
    assert "snr_db" in [c.limit.name for c in r.failed]
    assert "low SNR" in r.verdict and "20" in r.verdict


def test_verdict_names_a_slow_swipe():
    r = _only_read(_inspect({2: T2}, speed=SpeedProfile(5.0), imp=Impairments(snr_db=30.0))[0])
    assert "speed_min_cm_s" in [c.limit.name for c in r.failed]
    assert "slow swipe" in r.verdict


def test_a_clean_read_passes_and_names_its_least_headroom():
    r = _only_read(_inspect({1: T1}, imp=Impairments(snr_db=35.0))[0])
    assert not r.failed
    assert r.verdict.startswith("ok; least headroom: ")
    assert r.least.headroom == min(c.headroom for c in r.checks)


# --- anomalies --------------------------------------------------------------------------------


def _two_parity_errors():
    """Track 2 with a data bit flipped in characters 3 and 6 (two failures: no correction)."""
    from readchan.synth import SynthSpec, TrackContent, synthesize
    from readchan.synth.card import track_content
    tc = track_content(T2, track=2)
    bits = tc.bits.copy()
    lead = 22                              # track 2's clocking zeros; 5 bits per character
    bits[lead + 5 * 3 + 1] ^= 1
    bits[lead + 5 * 6 + 2] ^= 1
    return synthesize(SynthSpec(tracks=(TrackContent(bits, tc.density_bpi, tc.label),),
                                impairments=Impairments(snr_db=35.0)))


def test_parity_failure_is_reported_at_its_character():
    res = _two_parity_errors()
    reports = inspect_capture(Capture(res.samples, res.rate_hz, source="<synth>", units="FS"))
    r = _only_read(reports)
    parity = [a for a in r.anomalies if a.kind == "parity"]
    assert [a.char for a in parity] == [3, 6]
    assert all(r.read.start_s <= a.t_s <= r.read.end_s for a in parity)


# --- command line -----------------------------------------------------------------------------


def test_inspect_json_is_one_object_with_si_keys(monkeypatch, capsys):
    code, out, _ = run(monkeypatch, capsys, "inspect", "--json", FIXTURES / "three-track-swipe.wav")
    assert code == EXIT_VALID
    doc = json.loads(out)
    assert set(doc) == {"schema", "channels", "reads"} and doc["schema"] == "readchan.inspect/1"
    r = doc["reads"][0]
    assert {"amplitude", "noise", "pulse", "timing", "anomalies", "checks", "verdict", "trace"} <= set(r)
    assert {"snr_db", "noise_rms", "hum_hz", "mains_hz"} <= set(r["noise"])
    assert {"pw50_s", "pw50_cell", "pw50_m"} <= set(r["pulse"])
    assert {"mean_speed_cm_s", "mean_accel_m_s2", "margin_min", "margin_p1", "peak_shift_s"} <= set(r["timing"])
    assert isinstance(r["verdict"]["text"], str)


def test_inspect_masks_account_numbers_unless_unmasked(monkeypatch, capsys):
    for args in (["--json"], []):
        _, out, _ = run(monkeypatch, capsys, "inspect", *args, "--channel", "0", FIXTURES / "three-track-swipe.wav")
        assert "9912345678901239" not in out and "991234******1239" in out
    _, out, _ = run(monkeypatch, capsys, "inspect", "--json", "--unmask", "--channel", "0",
                    FIXTURES / "three-track-swipe.wav")
    assert json.loads(out)["reads"][0]["text"] == T1


def test_inspect_report_names_the_verdict(monkeypatch, capsys):
    code, out, _ = run(monkeypatch, capsys, "inspect", FIXTURES / "track2-reverse-noisy.flac")
    assert code == EXIT_VALID
    assert "verdict: " in out and "SNR" in out and "PW50" in out


def test_inspect_exit_code_is_1_for_an_invalid_read(monkeypatch, capsys, tmp_path):
    res = _two_parity_errors()
    path = write_capture(tmp_path / "bad.wav", res.samples, res.rate_hz)
    code, _, _ = run(monkeypatch, capsys, "inspect", path)
    assert code == EXIT_INVALID


def test_inspect_exit_code_is_3_without_data(monkeypatch, capsys, tmp_path):
    rng = np.random.default_rng(0)
    path = write_capture(tmp_path / "noise.wav", 0.01 * rng.standard_normal((24000, 1)), 48000.0)
    code, out, _ = run(monkeypatch, capsys, "inspect", path)
    assert code == EXIT_NO_DATA
    assert "no framed data" in out


@pytest.mark.parametrize("args,needle", [
    (["/nonexistent/capture.wav"], "capture.wav"),
    (["--notch", "humm", "FIX"], "--notch"),
    (["--plot", "out.txt", "FIX"], "--plot"),
    (["--plot", "/nonexistent/dir/out.png", "FIX"], "does not exist"),
])
def test_bad_input_is_a_one_line_error_with_exit_code_2(monkeypatch, capsys, args, needle):
    args = [str(FIXTURES / "track2-scope.csv") if a == "FIX" else a for a in args]
    code, out, err = run(monkeypatch, capsys, "inspect", *args)
    assert code == EXIT_BAD_INPUT
    assert len(err.strip().splitlines()) == 1 and needle in err and "Traceback" not in err


def test_plot_is_written_with_five_panels_per_read(monkeypatch, capsys, tmp_path):
    import matplotlib.image as mpimg
    target = tmp_path / "inspect.png"
    code, _, err = run(monkeypatch, capsys, "inspect", "--plot", target, FIXTURES / "three-track-swipe.wav")
    assert code == EXIT_VALID
    assert "15 panel(s)" in err                      # three reads × five panels
    img = mpimg.imread(target)
    assert img.shape[0] > 1000 and img.shape[1] > 1000
    assert float(np.std(img[..., :3])) > 0.05         # not a blank canvas


def test_plot_of_a_channel_without_data_has_one_panel(tmp_path):
    from readchan.report.plot import plot_reports
    rng = np.random.default_rng(0)
    cap = Capture(0.01 * rng.standard_normal((24000, 1)), 48000.0, source="<noise>", units="FS")
    assert plot_reports(inspect_capture(cap), tmp_path / "empty.png") == 1
    assert (tmp_path / "empty.png").stat().st_size > 1000
