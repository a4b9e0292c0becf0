"""The compiled per-transition loops (:mod:`readchan._compiled`): numba's machine code gives the
same bits as the plain Python it is compiled from, numba is loaded only when a long decode needs
it, and a kernel switches to compiled code once enough work has gone through it.

The reference for every kernel is its own plain-Python function (``kernel.py_func``): IEEE
double arithmetic in the same order (no fastmath) rounds the same, so equality is exact."""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from readchan import _compiled
from readchan.frontend import detect
from readchan.linecode import f2f

ROOT = Path(__file__).resolve().parents[1]
numba = pytest.importorskip("numba")


def _same(a, b) -> None:
    a = a if isinstance(a, tuple) else (a,)
    b = b if isinstance(b, tuple) else (b,)
    assert len(a) == len(b)
    for u, v in zip(a, b):
        u, v = np.asarray(u), np.asarray(v)
        assert u.dtype == v.dtype and u.shape == v.shape
        assert np.array_equal(u, v, equal_nan=True)


def _jittered_f2f(seed: int, n_bits: int = 600, jitter: float = 0.12) -> np.ndarray:
    """Transition times (s) of random bits at 1 ms cells, speed drifting by 20 %, with jitter."""
    rng = np.random.default_rng(seed)
    pos = f2f.cell_positions(rng.integers(0, 2, n_bits))
    pos = pos + rng.uniform(-jitter, jitter, pos.size)
    return np.sort(1e-3 * pos * (1 + 0.2 * pos / pos[-1]))


@pytest.mark.parametrize("seed", range(6))
def test_tracking_loop_compiled_equals_python(seed):
    d = np.diff(_jittered_f2f(seed))
    args = (d, float(f2f.initial_period(d)), np.zeros(0), 0.25)
    _same(f2f._track.compile_now()._run(*args), f2f._track.py_func(*args))


def test_tracking_loop_with_a_reference_period_compiled_equals_python():
    t = _jittered_f2f(7)
    ref = 1e-3 * (1 + 0.2 * np.arange(t.size - 1) / t.size)
    args = (np.diff(t), float(ref[0]), ref, 0.25)
    _same(f2f._track.compile_now()._run(*args), f2f._track.py_func(*args))


@pytest.mark.parametrize("seed", range(6))
def test_viterbi_parse_compiled_equals_python(seed):
    r = np.diff(_jittered_f2f(seed, jitter=0.2)) / 1e-3
    zero, lone = (r - 1.0) ** 2, 0.5 + (r - 0.5) ** 2
    pair = np.concatenate(([np.inf], (r[:-1] + r[1:] - 1.0) ** 2 + 0.5 * ((r[:-1] - 0.5) ** 2 + (r[1:] - 0.5) ** 2)))
    _same(f2f._viterbi.compile_now()._run(zero, lone, pair), f2f._viterbi.py_func(zero, lone, pair))


def _candidates(seed: int, n: int = 3000):
    """Candidate peaks of alternating polarity with a few same-polarity pairs and weak lobes."""
    rng = np.random.default_rng(seed)
    sgn = np.where(np.arange(n) % 2, 1, -1).astype(np.int8)
    flip = rng.random(n) < 0.05
    sgn[flip] = -sgn[flip]
    idx = np.cumsum(rng.integers(5, 40, n)).astype(np.int64)
    amp = np.where(rng.random(n) < 0.7, rng.uniform(0.6, 1.0, n), rng.uniform(0.05, 0.4, n))
    env = np.full(n, 0.9)
    S = np.flatnonzero(amp >= 0.4 * env)
    same = np.flatnonzero(sgn[S[1:]] == sgn[S[:-1]])
    interval = np.full(S.size - 1, 25.0)
    return S, same, idx, sgn, amp, env, interval, 0.4


@pytest.mark.parametrize("seed", range(4))
def test_alternation_cases_compiled_equal_python(seed):
    args = _candidates(seed)
    assert args[1].size > 10           # the cases the loop exists for
    _same(detect._alternation_cases.compile_now()._run(*args), detect._alternation_cases.py_func(*args))


def test_logic_edge_timing_compiled_equals_python():
    rng = np.random.default_rng(3)
    x = np.repeat(np.where(rng.random(400) < 0.5, 1.0, -1.0), 37)
    x = np.convolve(x, np.ones(5) / 5, mode="same") + rng.normal(0, 0.02, x.size)
    state = np.sign(x)
    change = np.flatnonzero(np.diff(state) != 0).astype(np.int64) + 1
    args = (x, 0.0, state[change].astype(np.float64), change)
    _same(detect._logic_times.compile_now()._run(*args), detect._logic_times.py_func(*args))


def _double(a):
    return a * 2


def test_kernel_runs_plain_python_until_the_work_passes_the_budget(monkeypatch):
    monkeypatch.setattr(_compiled, "JIT_AFTER", 100)
    k = _compiled.kernel(_double)
    k(np.ones(60))
    assert not k.compiled
    out = k(np.ones(60))                # 120 elements in all: compiled from here on
    assert k.compiled
    assert np.array_equal(out, np.full(60, 2.0))


def _loaded(code: str) -> bool:
    out = subprocess.run([sys.executable, "-c", code + "\nimport sys; print('numba' in sys.modules)"], cwd=ROOT,
                         capture_output=True, text=True, check=True).stdout
    return out.strip().splitlines()[-1] == "True"


def test_importing_the_decoder_does_not_load_numba():
    assert not _loaded("import readchan.channel, readchan.linecode.f2f, readchan.frontend.detect")


def test_decoding_a_short_capture_does_not_load_numba():
    assert not _loaded("from readchan.channel import decode_capture\nfrom readchan.io.capture import load_capture\n"
                       "decode_capture(load_capture('fixtures/three-track-swipe.wav'))")


def _lobe_signal(seed: int, n: int = 6000) -> np.ndarray:
    """Pulses of alternating sign with ringing and noise, quantised to 16-bit steps so that
    plateaus (equal neighbouring samples) occur, some clipped flat."""
    rng = np.random.default_rng(seed)
    t = np.arange(n)
    x = np.zeros(n)
    for k, c in enumerate(np.sort(rng.choice(np.arange(50, n - 50), 60, replace=False))):
        x += (-1) ** k * rng.uniform(0.3, 1.0) / (1 + ((t - c) / rng.uniform(2, 8)) ** 2)
    x += rng.normal(0, 0.02, n)
    x = np.clip(np.round(x * 2 ** 7) / 2 ** 7, -0.8, 0.8)
    return x


@pytest.mark.parametrize("seed", range(6))
def test_lobe_scan_compiled_equals_the_numpy_lobe_peaks(seed, monkeypatch):
    from readchan.frontend import scan

    x = _lobe_signal(seed)
    for h, floor in ((0.02, 0.04), (0.05, 0.1), (0.0, 0.0)):
        monkeypatch.setattr(scan.lobe_scan, "_run", None)
        monkeypatch.setattr(scan.lobe_scan, "_work", -10 ** 12)        # numpy path
        expected = detect._lobe_peaks(x, h, floor)
        got = scan.lobe_scan.compile_now()._run(x, h, floor)
        _same(got, expected)
        _same(scan.lobe_scan.py_func(x, h, floor), expected)


def test_a_sample_kernel_leaves_short_signals_to_the_numpy_path(monkeypatch):
    from readchan.frontend import scan

    monkeypatch.setattr(_compiled, "_LOADED", False)
    k = _compiled.kernel(_double, jit_after=1000)
    assert not k.ready(600)
    assert k.ready(600) and k.compiled
    assert scan.lobe_scan.jit_after == _compiled.SAMPLE_JIT_AFTER


@pytest.mark.parametrize("bands", [((4, 0.2, "lowpass"),), ((2, 0.01, "highpass"),),
                                   ((4, 0.3, "lowpass"), (2, 0.02, "highpass"))])
def test_zero_phase_pass_compiled_equals_scipy_sosfiltfilt(bands):
    from scipy import signal as sps

    from readchan.frontend import zerophase

    sos = np.concatenate([sps.butter(o, f, btype=b, output="sos") for o, f, b in bands])
    x = np.round(_lobe_signal(9, 5000) * 300) / 300 + np.linspace(0, 0.1, 5000)
    ntaps = 2 * sos.shape[0] + 1 - min(int(np.sum(sos[:, 2] == 0)), int(np.sum(sos[:, 5] == 0)))
    got = zerophase._zero_phase.compile_now()._run(sos, x, 3 * ntaps, sps.sosfilt_zi(sos))
    _same(got, sps.sosfiltfilt(sos, x))


def test_a_sample_kernel_compiles_at_once_when_numba_is_loaded_for_another(monkeypatch):
    monkeypatch.setattr(_compiled, "_LOADED", True)
    k = _compiled.kernel(_double, jit_after=10 ** 9)
    assert k.ready(1) and k.compiled


@pytest.mark.parametrize("seed", range(4))
def test_parabola_times_compiled_equal_the_numpy_path(seed, monkeypatch):
    from readchan.frontend import scan

    x = _lobe_signal(seed)
    idx = np.concatenate(([0, 1, x.size - 1], np.sort(np.random.default_rng(seed).integers(0, x.size, 300))))
    monkeypatch.setattr(scan.parabola, "_run", None)
    monkeypatch.setattr(scan.parabola, "_work", -10 ** 12)
    monkeypatch.setattr(_compiled, "_LOADED", False)
    expected = detect._parabolic_times(x, idx)                       # numpy path
    _same(scan.parabola.compile_now()._run(idx.astype(np.int64), x), expected)


@pytest.mark.parametrize("seed", range(3))
def test_clocking_pw50_compiled_equals_the_numpy_path(seed, monkeypatch):
    from readchan.formats.iso7811 import density

    rng = np.random.default_rng(seed)
    cell = 40.0                                         # samples per bit cell: clocking zeros
    centres = 30 + cell * np.arange(60) + rng.uniform(-1, 1, 60)
    t = np.arange(int(centres[-1]) + 200)
    w = sum((-1) ** k / (1 + ((t - c) / 4.0) ** 2) for k, c in enumerate(centres)) + rng.normal(0, 0.01, t.size)
    idx = np.round(centres).astype(np.int64)
    sign = np.where(np.arange(60) % 2 == 0, 1.0, -1.0)
    ratio = np.ones(59) + rng.uniform(-0.05, 0.05, 59)
    period_s = np.full(60, cell / 48_000.0)
    args = (w, 48_000.0, idx, sign, ratio, period_s)
    monkeypatch.setattr(_compiled, "_LOADED", False)
    monkeypatch.setattr(density._mean_pulse, "_run", None)
    monkeypatch.setattr(density._mean_pulse, "_work", -10 ** 15)
    expected = density.clocking_pw50_cell(*args)                     # numpy path
    density._mean_pulse.compile_now()
    assert expected is not None and density.clocking_pw50_cell(*args) == expected
