"""Stage-level specification of the transition detector, the F2F line decoder and segmentation.

These are the stages the tape formats reuse (biphase mark is F2F under another name), so their
behaviour is pinned here on signals built in the test itself, independently of the synthesizer:
an ideal Lorentzian readback pulse V = V0 / (1 + (2x/PW50)²) (the standard thin-medium
approximation; ../shared/REFERENCE.md) and F2F as ISO/IEC 7811-2 defines it (a transition at
every bit-cell boundary, one more mid-cell for a 1).
"""

from __future__ import annotations

import numpy as np
import pytest

from readchan.frontend.detect import TR_MISSING, TR_WEAK, detect_head
from readchan.frontend.segment import segment
from readchan.linecode.f2f import recover_bits

RATE_HZ = 48_000.0


def f2f_times(bits, period_s, t0_s: float = 0.01) -> np.ndarray:
    """F2F transition times of ``bits`` at a constant bit period (ISO/IEC 7811-2 definition)."""
    out = [t0_s]
    for k, b in enumerate(bits):
        if b:
            out.append(t0_s + (k + 0.5) * period_s)
        out.append(t0_s + (k + 1) * period_s)
    return np.asarray(out)


def lorentzian_train(times_s, amps, *, pw50_s: float, n: int, rate_hz: float = RATE_HZ) -> np.ndarray:
    """Superposed Lorentzian pulses of alternating sign (the medium's magnetisation flips
    back and forth, so successive transitions alternate), each scaled by ``amps``."""
    t = np.arange(n) / rate_hz
    x = np.zeros(n)
    for k, (tk, a) in enumerate(zip(times_s, amps)):
        x += (-1) ** k * a / (1 + (2 * (t - tk) / pw50_s) ** 2)
    return x


def clocking_bits(rng, n_data: int = 60) -> np.ndarray:
    return np.concatenate((np.zeros(16, np.uint8), rng.integers(0, 2, n_data).astype(np.uint8),
                           np.zeros(8, np.uint8)))


# --- transition detector ---------------------------------------------------------------------

def test_detector_finds_every_pulse_of_an_alternating_train_with_alternating_signs():
    times = 0.005 + np.arange(40) * 1.1e-3
    x = lorentzian_train(times, np.ones(40), pw50_s=0.2e-3, n=int(0.06 * RATE_HZ))
    tr = detect_head(x, RATE_HZ)
    assert len(tr) == 40
    assert np.all(np.sign(tr.amplitude[1:]) == -np.sign(tr.amplitude[:-1]))
    assert np.all(tr.flags == 0)


def test_detector_times_isolated_pulses_to_a_fraction_of_a_sample():
    # pulses at fractional sample positions 0.0, 0.1 … 0.9; PW50 of 10 samples
    frac = np.arange(40) % 10 / 10
    times = (240 + 53 * np.arange(40) + frac) / RATE_HZ
    x = lorentzian_train(times, np.ones(40), pw50_s=10 / RATE_HZ, n=2400)
    tr = detect_head(x, RATE_HZ)
    err_samples = (tr.times_s - times) * RATE_HZ
    assert np.max(np.abs(err_samples)) < 0.1


def test_detector_index_is_the_nearest_sample_of_each_transition():
    times = (300.3 + 60 * np.arange(30)) / RATE_HZ
    x = lorentzian_train(times, np.ones(30), pw50_s=8 / RATE_HZ, n=2400)
    tr = detect_head(x, RATE_HZ)
    assert tr.index.dtype == np.int64
    assert np.array_equal(tr.index, np.rint(times * RATE_HZ).astype(np.int64))


def test_detector_rescues_a_weak_pulse_between_two_of_the_same_polarity_and_flags_it():
    amps = np.ones(40)
    amps[20] = 0.3          # below 0.4 of the envelope, above half of that
    times = 0.005 + np.arange(40) * 1.1e-3
    x = lorentzian_train(times, amps, pw50_s=0.2e-3, n=int(0.06 * RATE_HZ))
    tr = detect_head(x, RATE_HZ)
    assert len(tr) == 40
    k = int(np.argmin(np.abs(tr.times_s - times[20])))
    assert tr.flags[k] & TR_WEAK
    assert np.count_nonzero(tr.flags) == 1


def test_detector_flags_the_pulse_after_one_too_weak_to_rescue():
    times = 0.005 + np.arange(41) * 1.1e-3
    amps = np.ones(41)
    amps[20] = 0.1          # below half the threshold: not rescued, its neighbours share a polarity
    x = lorentzian_train(times, amps, pw50_s=0.2e-3, n=int(0.06 * RATE_HZ))
    tr = detect_head(x, RATE_HZ)
    assert len(tr) == 40
    k = int(np.argmin(np.abs(tr.times_s - times[21])))
    assert tr.flags[k] & TR_MISSING
    assert np.count_nonzero(tr.flags) == 1


def test_detector_finds_nothing_in_silence():
    assert len(detect_head(np.zeros(4800), RATE_HZ)) == 0


# --- F2F line decoder --------------------------------------------------------------------------

@pytest.mark.parametrize("method", ["sequence", "loop"])
def test_line_decoder_recovers_the_bits_of_clean_f2f_at_constant_speed(method):
    bits = clocking_bits(np.random.default_rng(1))
    bs = recover_bits(f2f_times(bits, 1e-3), method=method)
    assert np.array_equal(bs.bits, bits)
    assert np.allclose(bs.period_s, 1e-3, rtol=1e-9)
    assert np.allclose(bs.margin, 1.0)


def test_line_decoder_gives_each_bit_the_time_of_the_transition_that_opens_its_cell():
    bits = clocking_bits(np.random.default_rng(2))
    t = f2f_times(bits, 1e-3)
    bs = recover_bits(t)
    assert np.allclose(bs.start_s, 0.01 + 1e-3 * np.arange(bits.size))
    assert np.array_equal(t[bs.first_transition], bs.start_s)


def test_line_decoder_margin_falls_linearly_with_interval_error():
    # margin = |r − ¾| / ¼: a full cell 10 % short has r = 0.9, margin 0.6 (module docstring's definition)
    bits = np.zeros(40, np.uint8)
    t = f2f_times(bits, 1e-3)
    t[25:] -= 0.1e-3          # interval 24 (bit 24) is 0.9 of a cell; the rest unchanged
    bs = recover_bits(t, method="loop", loop_gain=1e-9)
    assert bs.margin[24] == pytest.approx(0.6, abs=1e-6)
    assert np.all(bs.bits == 0)


@pytest.mark.parametrize("change", [-0.4, 0.4])
def test_line_decoder_tracks_a_speed_ramp_of_forty_percent_over_the_read(change):
    rng = np.random.default_rng(3)
    bits = clocking_bits(rng, 200)
    # bit period ramps linearly over the read: T_k = T0 (1 + change · k / N)
    T = 1e-3 * (1 + change * np.arange(bits.size) / bits.size)
    edges = 0.01 + np.concatenate(([0.0], np.cumsum(T)))
    t = [edges[0]]
    for k, b in enumerate(bits):
        if b:
            t.append(0.5 * (edges[k] + edges[k + 1]))
        t.append(edges[k + 1])
    for method in ("sequence", "loop"):
        bs = recover_bits(np.asarray(t), method=method)
        assert np.array_equal(bs.bits, bits), method
        assert np.allclose(bs.period_s, T, rtol=0.05), method


@pytest.mark.parametrize("method", ["sequence", "loop"])
def test_line_decoder_reads_f2f_with_transitions_jittered_by_ten_percent_of_a_cell(method):
    # ±10 % per transition moves an interval by up to ±0.2 cell: a half cell stays below ¾
    rng = np.random.default_rng(4)
    bits = clocking_bits(rng, 200)
    t = f2f_times(bits, 1e-3)
    t[1:-1] += rng.uniform(-0.1e-3, 0.1e-3, t.size - 2)
    bs = recover_bits(t, method=method)
    assert np.array_equal(bs.bits, bits)
    assert bs.margin.min() > 0


def test_line_decoder_marks_every_interval_of_clean_f2f_regular():
    bits = clocking_bits(np.random.default_rng(5))
    bs = recover_bits(f2f_times(bits, 1e-3))
    assert bs.regularity == 1.0


def test_line_decoder_finds_random_intervals_irregular():
    t = np.cumsum(np.random.default_rng(6).exponential(1e-3, 300))
    assert recover_bits(t).regularity < 0.6


# --- segmentation ------------------------------------------------------------------------------

def _transitions(times_s):
    n = int((times_s[-1] + 0.01) * RATE_HZ)
    return detect_head(lorentzian_train(times_s, np.ones(times_s.size), pw50_s=0.2e-3, n=n), RATE_HZ)


def test_segmentation_splits_two_swipes_at_the_quiet_gap():
    a = 0.005 + np.arange(100) * 1e-3
    b = a[-1] + 0.2 + np.arange(80) * 1e-3
    segs = segment(_transitions(np.concatenate((a, b))))
    assert [s.n_transitions for s in segs] == [100, 80]
    assert segs[0].start_s == pytest.approx(a[0], abs=1e-4)
    assert segs[1].end_s == pytest.approx(b[-1], abs=1e-4)


def test_segmentation_drops_a_burst_too_short_to_be_a_read():
    a = 0.005 + np.arange(100) * 1e-3
    b = a[-1] + 0.2 + np.arange(10) * 1e-3
    segs = segment(_transitions(np.concatenate((a, b))))
    assert [s.n_transitions for s in segs] == [100]


def test_segmentation_keeps_one_read_through_a_slow_down():
    # cells stretching from 1 ms to 3 ms (a swipe that slows) are one read, not several
    d = np.linspace(1e-3, 3e-3, 120)
    segs = segment(_transitions(0.005 + np.concatenate(([0.0], np.cumsum(d)))))
    assert len(segs) == 1 and segs[0].n_transitions == 121
