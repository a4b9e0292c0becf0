"""No false accept under damage the checks cannot see (readchan.formats.iso7811.evidence, the field check).

Card content is invented (made-up names, account numbers with the made-up prefix 99).
"""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np
import pytest

from readchan.channel import DecodeSettings, decode_channel
from readchan.formats.iso7811.evidence import boundary_steps, damaged_characters
from readchan.formats.iso7813 import layout_errors
from readchan.formats.iso7811.charset import TRACKS
from readchan.formats.iso7811.framing import encode_text, frame
from readchan.synth import Impairments, SpeedProfile, SynthSpec, synthesize
from readchan.synth.card import track_content

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "scripts"))
import bench_false_accept as bench  # noqa: E402

T1 = TRACKS[1]


def _swipe(text: str, speed: SpeedProfile, imp: Impairments, seed: int, *, track: int = 1,
           rate_hz: float = 96_000.0):
    spec = SynthSpec(tracks=(track_content(text, track=track),), speed=speed, impairments=imp,
                     rate_hz=rate_hz, seed=seed)
    return synthesize(spec)


def _reads(x: np.ndarray, rate_hz: float = 96_000.0, track: int = 1, **kw):
    settings = DecodeSettings(fmt=TRACKS[track].fmt, track=track, **kw)
    return decode_channel(x, rate_hz, settings).reads


# --------------------------------------------------------------------------- the evidence


def test_a_phase_jump_in_the_cell_boundaries_is_measured_in_cells():
    b = np.arange(40, dtype=float)
    b[20:] += 0.4                                     # the clock jumps by 0.4 cell at boundary 20
    phase, period = boundary_steps(b)
    assert abs(phase[20] - 0.4) < 1e-9 and abs(period[20]) < 1e-9
    assert np.all(np.abs(phase[:12]) < 1e-9) and np.all(np.abs(phase[29:]) < 1e-9)


def test_a_single_displaced_boundary_is_no_phase_step():
    b = np.arange(40, dtype=float)
    b[20] += 0.3                                      # one jittered transition; the grid goes on
    phase, _ = boundary_steps(b)
    assert abs(phase[20]) < 1e-9


def test_a_speed_jump_is_a_period_step():
    b = np.concatenate((np.arange(21.0), 20 + 1.25 * np.arange(1, 20)))
    _, period = boundary_steps(b)
    assert abs(period[20] - 0.25) < 1e-9


def test_a_corrected_character_counts_as_damaged():
    fr = frame(np.concatenate((np.zeros(20, np.uint8), encode_text(";1234=?", TRACKS[2].fmt),
                               np.zeros(20, np.uint8))), TRACKS[2].fmt)
    found = damaged_characters(fr, {"odd interval": np.asarray(fr.bit_index)[3, :1]}, corrected=(1,))
    assert found == ((1, ("corrected",)), (3, ("odd interval",)))


# --------------------------------------------------------------------------- reproductions


def test_a_stretch_reversed_in_time_is_not_valid():
    # issue reproduction: samples 8284 to 8284+1433 reversed; the checks still pass
    text = "%B9916945167976810^ULM/TIRA^280495302172157229608228?"
    x = _swipe(text, SpeedProfile(57.5, "swipe", 0.08), Impairments(jitter=0.027, snr_db=35.0, invert=True),
               50699).samples[:, 0].copy()
    x[8284:8284 + 1433] = x[8284:8284 + 1433][::-1].copy()
    reads = _reads(x)
    assert reads and all(r.checks_ok for r in reads)
    assert not any(r.valid for r in reads)
    assert reads[0].rejected == "suspect" and len(reads[0].damaged_chars) >= 2


def _forged_bursts(width_samples: int, seed: int) -> tuple[str, np.ndarray]:
    """Two bursts of three narrow spikes (1–4 × the pulse peak) on a track 1 card, each at the
    last two cells of an account digit '6': the spikes add the mid-cell transitions and
    overwrite the boundary pulse between them, which turns '6' (0x16, bits …0 parity 0) into
    'V' (0x36, bits …1 parity 1) in two characters: parity and LRC all balance."""
    text = "%B9960387027735658540^ULM/TIRA^2904101000000?"
    res = _swipe(text, SpeedProfile(40.0, "swipe", 0.1), Impairments(jitter=0.01, snr_db=34.0), 4242)
    x = res.samples[:, 0].copy()
    cells = res.cell_times_s[0][0]
    tt = res.transition_times_s[0]
    peak = res.median_peak[0]
    rng = np.random.default_rng(seed)
    for c in (4, 15):
        k5 = T1.leading_zeros + c * T1.fmt.bits_per_char + 5
        b1, b2, b3 = cells[k5], cells[k5 + 1], cells[k5 + 2]
        s = np.sign(x[int(round(tt[np.argmin(np.abs(tt - b1))] * res.rate_hz))])
        gain = rng.uniform(0.8, 4.0, 3)
        jit = rng.normal(0.0, 0.05, 3) * (b2 - b1)
        for t0, a in (((b1 + b2) / 2 + jit[0], -s * gain[0]), (b2 + jit[1], 2 * s * gain[1]),
                      ((b2 + b3) / 2 + jit[2], -s * gain[2])):
            i = int(t0 * res.rate_hz)
            x[i:i + width_samples] += a * peak
    return text, x


@pytest.mark.parametrize("width, seed", [(2, 1), (2, 8), (3, 4), (4, 2)])
def test_two_impulse_bursts_forging_a_compensating_pattern_are_suspect(width, seed):
    # a comparable case to the issue's: '%B99V0387027735V5854...' reads with every check good;
    # the spikes' size and the intervals they make are the evidence (field check off)
    text, x = _forged_bursts(width, seed)
    wrong = [r for r in _reads(x, field_check=False) if r.checks_ok and r.frame.text != text]
    assert wrong
    assert all(not r.valid and r.rejected == "suspect" and len(r.damaged_chars) >= 2 for r in wrong)


def test_forged_bursts_that_leave_one_damaged_character_are_caught_by_the_field_check():
    # width 2, seed 7: the second burst leaves no evidence the rule trusts, but the account
    # number now holds a letter, which the ISO/IEC 7813 layout forbids
    text, x = _forged_bursts(2, 7)
    (r,) = [r for r in _reads(x) if r.frame.text != text]
    assert r.checks_ok and not r.valid and r.rejected == "fields"
    assert r.field_errors == ("account number holds a non-digit",)


def test_two_cards_cut_together_in_phase_are_a_recording_of_the_spliced_card():
    # issue reproduction: A's first 12742 samples, then B's, both swiped identically.  The
    # splice lands in the name field the two cards share, so the capture is, to well within
    # its noise, what a card holding B's account number and A's expiry gives: no decoder can
    # tell the two apart; the LRC agreeing (a 1-in-64 chance) is all that makes it valid.
    a_text = "%B994005169846661710^ULM/TIRA^3611347727?"
    b_text = "%B999839417228645848^ULM/TIRA^3407867200053517634560?"
    spliced = "%B999839417228645848^ULM/TIRA^3611347727?"
    speed = SpeedProfile(50.36, "ramp", 0.19)
    quiet = Impairments(jitter=0.001, reverse=True)
    a, b, c = (_swipe(t, speed, quiet, 10683).samples[:, 0] for t in (a_text, b_text, spliced))
    cut = np.concatenate((a[:12742], b[12742:]))
    noise_rms = _swipe(a_text, speed, Impairments(jitter=0.001, snr_db=36.1, reverse=True), 10683).noise_rms[0]
    assert cut.size == c.size
    assert np.sqrt(np.mean((cut - c) ** 2)) < 0.1 * noise_rms
    noisy = Impairments(jitter=0.001, snr_db=36.1, reverse=True)
    xa = _swipe(a_text, speed, noisy, 10683).samples[:, 0]
    xb = _swipe(b_text, speed, noisy, 10683).samples[:, 0]
    x = np.concatenate((xa[:12742], xb[12742:]))
    reads = _reads(0.9 * x / np.max(np.abs(x)))
    assert [r.frame.text for r in reads] == [spliced]
    assert reads[0].field_errors == ()                # B's Luhn digit, A's well-formed expiry


# --------------------------------------------------------------------------- the field check


def test_a_track2_read_failing_luhn_is_not_valid_unless_the_field_check_is_off():
    text = ";9912345678901238=29121010000000000?"     # Luhn digit of 991234567890123 is 9
    x = _swipe(text, SpeedProfile(30.0), Impairments(snr_db=40.0), 5, track=2,
               rate_hz=48_000.0).samples[:, 0]
    (r,) = _reads(x, 48_000.0, track=2)
    assert r.checks_ok and not r.valid and r.rejected == "fields"
    assert r.field_errors == ("account number fails the Luhn check",)
    (r,) = _reads(x, 48_000.0, track=2, field_check=False)
    assert r.valid


def test_the_field_check_judges_only_reads_claiming_a_7813_layout():
    # ISO/IEC 7813: track 1 format code B and the track 2 layout; track 3 (ISO 4909) is not judged
    assert layout_errors("%A12345^X?", "iso-alpha", 1) == ()
    assert layout_errors(";12345=9999?", "iso-bcd", 3) == ()
    assert layout_errors("%B99V0387^ULM/TIRA^2904?", "iso-alpha", 1) == ("account number holds a non-digit",)
    assert layout_errors(";9912345678901239=2913?", "iso-bcd", 2) == ("expiry month out of range",)
    assert layout_errors(";9912345678901239==101?", "iso-bcd", 2) == ()   # absent expiry (common practice)


# --------------------------------------------------------------------------- benchmark subset


def test_a_seeded_subset_of_the_damage_benchmark_has_no_false_accept():
    kinds = tuple(k for k in bench.KINDS if k != "cut, same swipe")
    result = bench.run(12, seed=3, workers=1, kinds=kinds)
    assert result["false_accept_cases"] == []
    assert sum(v[0] for v in result["tally"].values()) > 0


def test_a_suspect_read_is_reported_with_its_checks_and_damaged_characters(monkeypatch, capsys, tmp_path):
    import json

    import soundfile as sf

    from conftest import run_cli

    text = "%B9916945167976810^ULM/TIRA^280495302172157229608228?"
    x = _swipe(text, SpeedProfile(57.5, "swipe", 0.08), Impairments(jitter=0.027, snr_db=35.0, invert=True),
               50699).samples[:, 0].copy()
    x[8284:8284 + 1433] = x[8284:8284 + 1433][::-1].copy()
    path = tmp_path / "reversed.wav"
    sf.write(path, x, 96_000, subtype="PCM_24")
    code, out, _ = run_cli(monkeypatch, capsys, "decode", "--json", path)
    (r,) = json.loads(out)["reads"]
    assert code == 1
    assert r["checks_ok"] and not r["valid"] and r["rejected"] == "suspect"
    assert r["parity_failed"] == [] and r["lrc_ok"]
    assert len(r["damaged_chars"]) >= 2 and all(d["evidence"] for d in r["damaged_chars"])
    code, out, _ = run_cli(monkeypatch, capsys, "decode", path)
    assert "suspect" in out and "damage in more than one character" in out
