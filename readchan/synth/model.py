"""The forward model: a :class:`~readchan.synth.spec.SynthSpec` rendered into head voltage samples.

Input: a :class:`~readchan.synth.spec.SynthSpec`.  Output: a
:class:`~readchan.synth.spec.SynthResult` (samples × tracks at the output rate in Hz, with the
truth: transition and cell-boundary times in seconds, swipe windows, peaks and noise).  The
steps and their sources are in :mod:`readchan.synth`'s docstring.
"""

from __future__ import annotations

import math

import numpy as np

from readchan.errors import ParameterError
from readchan.linecode.f2f import f2f_positions
from readchan.synth.chain import FrontEnd, filter_chain, quantise
from readchan.synth.head import PulseModel
from readchan.synth.spec import (FIRST_TRANSITION_M, HARD_SAMPLE_LIMIT, SAMPLE_LIMIT, Impairments, SynthResult, SynthSpec,
                                 estimate_samples, swipe_geometry)

PULSE_REACH_PW50 = 40.0
"""Each pulse is rendered over ± this many PW50 around its centre (our choice): a Lorentzian's
tail there is 1/(1 + 80²) ≈ 1.6·10⁻⁴ of its peak, under the step of a 12-bit converter
(4.9·10⁻⁴ of full scale)."""

POSITION_GRID_POINTS = 20001
"""Points of the card-position grid on which a swipe's time of position is tabulated and
interpolated (a 4.3 µm step on an ID-1 card, a tenth of the default head's PW50; our choice)."""


def synthesize(spec: SynthSpec, *, max_samples: int | None = SAMPLE_LIMIT) -> SynthResult:
    """Render ``spec`` into samples; see :mod:`readchan.synth` for the model.

    Refuses (:class:`ParameterError`) a capture of more than ``max_samples`` samples
    (:func:`~readchan.synth.spec.estimate_samples`, checked before anything is computed; None:
    up to :data:`~readchan.synth.spec.HARD_SAMPLE_LIMIT`).
    """
    _check_size(spec, max_samples)
    rng = np.random.default_rng(spec.seed)
    imp = spec.impairments
    fe = spec.chain
    k_os = fe.internal_factor
    fs = spec.rate_hz * k_os                      # internal rate (the output rate without oversampling)
    card_m, swipe_s, n_out = swipe_geometry(spec)
    n = (n_out - 1) * k_os + 1
    if n * len(spec.tracks) > HARD_SAMPLE_LIMIT:
        raise ParameterError(f"the capture would hold {n} internal samples; lower the rate, the oversampling "
                             "or the number of swipes")
    t = np.arange(n) / fs
    out, transitions, cells, windows = _render_swipes(spec, rng, t, card_m, swipe_s)
    median_peak = _levels(spec, out, transitions, t, fs)
    chained = fe != FrontEnd()
    clean = filter_chain(-out if imp.invert else out, fs, fe) if chained else None
    noise, noise_rms = _add_impairments(out, median_peak, t, rng, imp, k_os, chained)
    out += imp.dc_offset
    if imp.invert:
        out = -out
    if chained:
        out = quantise(filter_chain(out, fs, fe), fe)
        delay_s = fe.delay_s()
        q2 = fe.quantisation_noise_rms ** 2
        out_noise = tuple(float(math.sqrt(v + q2)) for v in np.var(filter_chain(noise, fs, fe), axis=0))
        out_peak = tuple(_pulse_peaks(clean[:, ch], tk + delay_s, spec.rate_hz) if spec.output == "head"
                         else float(np.median(np.abs(clean[:, ch]))) for ch, tk in enumerate(transitions))
    else:
        delay_s, out_noise, out_peak = 0.0, tuple(noise_rms), median_peak
    return SynthResult(
        samples=np.ascontiguousarray(out),
        rate_hz=float(spec.rate_hz),
        transition_times_s=transitions,
        cell_times_s=tuple(tuple(c) for c in cells),
        swipe_windows_s=tuple(windows),
        pw50_m=float(spec.pulse.pw50_m),
        median_peak=median_peak,
        noise_rms=tuple(noise_rms),
        output_median_peak=out_peak,
        output_noise_rms=out_noise,
        chain_delay_s=delay_s,
    )


def _check_size(spec: SynthSpec, max_samples: int | None) -> None:
    """Refuse a capture of more than ``max_samples`` samples (None: the hard limit)."""
    need = estimate_samples(spec)
    limit = HARD_SAMPLE_LIMIT if max_samples is None else min(int(max_samples), HARD_SAMPLE_LIMIT)
    if need > limit:
        gb = need * 8 / 1e9
        hint = "" if limit == HARD_SAMPLE_LIMIT else "; pass max_samples=None to render it anyway"
        raise ParameterError(f"the capture would hold {need:,} samples ({gb:.1f} GB as float64), over the limit of "
                             f"{limit:,}; lower the rate, the number of swipes, the pauses, or raise the speed or "
                             f"density{hint}")


def _render_swipes(spec: SynthSpec, rng: np.random.Generator, t: np.ndarray, card_m: float,
                   swipe_s: float) -> tuple[np.ndarray, tuple[np.ndarray, ...], list, list]:
    """Steps 1–3 of the model for every swipe: the head voltage (samples × tracks at the times
    ``t``, zero for flux output), the transition times of each track (s), the cell-boundary
    times of each track per swipe (s), and each swipe's (start, end) in seconds."""
    imp = spec.impairments
    n = t.size
    out = np.zeros((n, len(spec.tracks)))
    trans: list[list[np.ndarray]] = [[] for _ in spec.tracks]
    cells: list[list[np.ndarray]] = [[] for _ in spec.tracks]
    windows = []
    xg = np.linspace(0.0, card_m, POSITION_GRID_POINTS)
    for s in range(spec.swipes):
        t0 = spec.lead_s + s * (swipe_s + spec.gap_s)
        windows.append((t0, t0 + swipe_s))
        tg = t0 + spec.speed.time_of_position(xg, card_m)
        i0, i1 = np.searchsorted(t, [t0, t0 + swipe_s])
        ts = t[i0:i1]
        x_head = np.interp(ts, tg, xg)
        v_rel = spec.speed.speed_cm_s(x_head / card_m) / (spec.reference_cm_s or spec.speed.mean_cm_s)
        for ch, track in enumerate(spec.tracks):
            cell = track.cell_m / (1 + imp.density_error)
            nominal = FIRST_TRANSITION_M + f2f_positions(track.bits, cell)
            x = nominal + rng.uniform(-imp.jitter, imp.jitter, nominal.size) * cell
            bounds = FIRST_TRANSITION_M + np.arange(np.asarray(track.bits).size + 1) * cell
            if imp.reverse:
                x, bounds = card_m - x[::-1], card_m - bounds[::-1]
            tk = np.interp(x, xg, tg)
            trans[ch].append(tk)
            cells[ch].append(np.interp(bounds, xg, tg))
            if spec.output == "flux":
                continue
            sign = np.where(np.arange(x.size) % 2 == 0, 1.0, -1.0)
            if imp.reverse:
                sign = -sign
            out[i0:i1, ch] += spec.amplitude * v_rel * _superpose(x_head, x, sign, spec.pulse)
            if imp.edge_pulses:
                _add_edge_pulses(out[:, ch], t, tg, xg, card_m, sign, spec)
    return out, tuple(np.concatenate(tr) for tr in trans), cells, windows


def _levels(spec: SynthSpec, out: np.ndarray, transitions: tuple[np.ndarray, ...], t: np.ndarray,
            fs: float) -> tuple[float, ...]:
    """The median peak of each track (the level the impairments are stated against); for flux
    output, ``out`` is first filled with the magnetisation square wave."""
    if spec.output == "flux":
        for ch, tk in enumerate(transitions):
            level = (np.searchsorted(tk, t) % 2) * 2.0 - 1.0
            out[:, ch] = spec.amplitude * level
        return tuple(spec.amplitude for _ in spec.tracks)
    n = out.shape[0]
    return tuple(
        float(np.median(np.abs(out[np.clip(np.round(tk * fs).astype(int), 0, n - 1), ch])))
        for ch, tk in enumerate(transitions)
    )


def _add_impairments(out: np.ndarray, median_peak: tuple[float, ...], t: np.ndarray, rng: np.random.Generator,
                     imp: Impairments, k_os: int, chained: bool) -> tuple[np.ndarray | None, list[float]]:
    """Step 4 of the model, in place on ``out``: hum, baseline wander, white noise and clipping,
    each relative to the track's median peak.  Returns the noise alone (for the front end's
    output noise; None without a front end) and each track's noise RMS in the internal band."""
    n = out.shape[0]
    noise = np.zeros_like(out) if chained else None
    noise_rms = []
    for ch in range(out.shape[1]):
        peak = median_peak[ch]
        if imp.hum_level:
            out[:, ch] += imp.hum_level * peak * np.sin(2 * np.pi * imp.hum_hz * t + rng.uniform(0, 2 * np.pi))
        if imp.wander_level:
            out[:, ch] += imp.wander_level * peak * np.sin(2 * np.pi * imp.wander_hz * t + rng.uniform(0, 2 * np.pi))
        rms = 0.0
        if imp.snr_db is not None:
            rms = peak / 10 ** (imp.snr_db / 20)
            # the same noise density at any internal rate: rms over the band up to rate_hz / 2
            w = rng.normal(0.0, rms * math.sqrt(k_os), n)
            out[:, ch] += w
            if chained:
                noise[:, ch] = w
        noise_rms.append(rms)
        if imp.clip is not None:
            out[:, ch] = np.clip(out[:, ch], -imp.clip * peak, imp.clip * peak)
    return noise, noise_rms


def _pulse_peaks(y: np.ndarray, times_s: np.ndarray, rate_hz: float) -> float:
    """Median over pulses of max |y| between the midpoints to the neighbouring pulse times."""
    if times_s.size == 0:
        return 0.0
    c = np.clip(np.round(times_s * rate_hz).astype(np.int64), 0, y.size - 1)
    first = int(c[0]) - (int(c[1] - c[0]) // 2 if c.size > 1 else 1)
    edges = np.concatenate(([max(0, first)], (c[1:] + c[:-1]) // 2))
    edges = np.maximum.accumulate(np.clip(edges, 0, y.size - 1))
    peaks = np.maximum.reduceat(np.abs(y), edges)
    return float(np.median(peaks))


def _add_edge_pulses(y: np.ndarray, t: np.ndarray, tg: np.ndarray, xg: np.ndarray,
                     card_m: float, sign: np.ndarray, spec: SynthSpec) -> None:
    """Add the two card-edge pulses of one swipe to ``y`` in place.

    Before the first transition the stripe holds −s₀·Mr, after the last +s_last·Mr (s the
    transitions' signs, a transition stepping 2·Mr); at the edges it steps from and to zero,
    i.e. −½·s₀ and −½·s_last of a full transition.  Each pulse is rendered at the speed the
    edge passes the head, the head position continued beyond the card in a straight line.
    """
    v_ref = spec.reference_cm_s or spec.speed.mean_cm_s
    reach_m = PULSE_REACH_PW50 * spec.pulse.pw50_m
    for x_e, s_e in ((0.0, -0.5 * sign[0]), (card_m, -0.5 * sign[-1])):
        v_cm_s = float(spec.speed.speed_cm_s(np.array([x_e / card_m]))[0])
        t_e = float(np.interp(x_e, xg, tg))
        a, b = np.searchsorted(t, [t_e - reach_m / (v_cm_s / 100), t_e + reach_m / (v_cm_s / 100)])
        dx = (t[a:b] - t_e) * v_cm_s / 100
        y[a:b] += spec.amplitude * (v_cm_s / v_ref) * s_e * spec.pulse.shape(dx)


def _superpose(x_head: np.ndarray, x_m: np.ndarray, sign: np.ndarray, pulse: PulseModel) -> np.ndarray:
    """Σ_k sign_k · p(x_head − x_k), each pulse evaluated over ±:data:`PULSE_REACH_PW50` PW50 around its centre.

    ``x_head`` must be non-decreasing (the head moves one way during a swipe).
    """
    acc = np.zeros_like(x_head)
    reach = PULSE_REACH_PW50 * pulse.pw50_m
    lo = np.searchsorted(x_head, x_m - reach)
    hi = np.searchsorted(x_head, x_m + reach)
    for k in range(x_m.size):
        a, b = lo[k], hi[k]
        if b > a:
            acc[a:b] += sign[k] * pulse.shape(x_head[a:b] - x_m[k])
    return acc
