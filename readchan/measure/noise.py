"""Noise of the wide-band measurement signal on its quiet samples.

Input: the wide-band signal (numpy array, capture units), its sample rate in Hz and a boolean
mask of the quiet samples; for :func:`quantised_sigma` the raw samples and the converter step.
Output: :class:`NoiseEstimate` (noise RMS in capture units, the time it was taken over in
seconds, what was left out), the converter step (:func:`quantisation_step`), and the per-read
:class:`Noise` (RMS, SNR in dB, hum ratio).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from readchan.frontend.detect import quantisation_step as grid_step


@dataclass(frozen=True)
class Noise:
    """Noise of one read: ``noise_rms`` (capture units, channel-wide), ``snr_db`` =
    20·log10(median |peak| / noise RMS), ``hum_ratio`` = hum amplitude / median |peak|."""

    noise_rms: float
    snr_db: float
    hum_ratio: float | None


QUANT_BLOCK_S = 0.004
"""Stretch of quiet samples over which the baseline is taken as constant between two levels."""

QUANT_MIN_SAMPLES = 256
"""Fewest quiet samples :func:`quantised_sigma` estimates from (our choice)."""

QUANT_MIN_BLOCK_SAMPLES = 16
"""Fewest samples in one constant-baseline block of :func:`quantised_sigma` (our choice)."""

QUANT_MIN_BLOCKS = 4
"""Fewest blocks :func:`quantised_sigma` estimates from (our choice)."""

QUANT_LEVELS = 4
"""Levels counted on each side of a block's median level; farther samples count on the last
(the estimate serves noise under 0.6 step, for which 3.5 steps away is beyond 5.8 σ)."""

SIGMA_GRID_STEPS = (0.02, 2.0, 100)
"""The σ grid of :func:`quantised_sigma`: from, to (in converter steps) and points, spaced
geometrically (our choice; the estimate serves noise under 0.6 step)."""

MU_GRID_POINTS = 201
"""Baseline offsets tried per block, across one step (1/200-step spacing; our choice)."""

LOG_FLOOR = 1e-12
"""Smallest level probability taken into the log-likelihood (keeps log finite)."""


def quantised_sigma(x: np.ndarray, use: np.ndarray, step: float, rate_hz: float) -> float | None:
    """Standard deviation of the noise before a converter of step ``step``, from the raw quiet
    samples ``x[use]`` that sit on its levels: maximum likelihood of Gaussian noise of σ about a
    baseline μ (constant within each ``QUANT_BLOCK_S`` block, anywhere between two levels),
    rounded to the nearest level, P(level k) = Φ((k + ½ − μ)/σ) − Φ((k − ½ − μ)/σ) (the
    quantised-Gaussian model, Widrow & Kollár, *Quantization Noise*, 2008, ch. 4).  σ is searched
    on a grid of 0.02–2 steps, μ per block on 1/200-step spacing.  None with too few samples."""
    from scipy.special import ndtr

    idx = np.flatnonzero(use)
    if idx.size < QUANT_MIN_SAMPLES:
        return None
    block = max(QUANT_MIN_BLOCK_SAMPLES, int(QUANT_BLOCK_S * rate_hz))
    # blocks of consecutive used samples
    brk = np.flatnonzero(np.diff(idx) > 1) + 1
    runs = np.split(idx, brk)
    counts = []
    origin = float(np.median(x[idx]))          # a level: the grid need not pass through zero
    for run in runs:
        for a in range(0, run.size - block + 1, block):
            lv = np.round((x[run[a:a + block]] - origin) / step).astype(np.int64)
            d = np.clip(lv - int(np.median(lv)), -QUANT_LEVELS, QUANT_LEVELS)
            counts.append(np.bincount(d + QUANT_LEVELS, minlength=2 * QUANT_LEVELS + 1))
    if len(counts) < QUANT_MIN_BLOCKS:
        return None
    n = np.asarray(counts, float)                                   # (blocks, 9 levels)
    k = np.arange(-QUANT_LEVELS, QUANT_LEVELS + 1, dtype=float)
    s_grid = np.geomspace(*SIGMA_GRID_STEPS)
    mu = np.linspace(-0.5, 0.5, MU_GRID_POINTS)
    z_hi = (k[None, None, :] + 0.5 - mu[None, :, None]) / s_grid[:, None, None]
    z_lo = (k[None, None, :] - 0.5 - mu[None, :, None]) / s_grid[:, None, None]
    p = np.clip(ndtr(z_hi) - ndtr(z_lo), LOG_FLOOR, 1.0)               # (σ, μ, level)
    ll = np.einsum("bk,smk->sbm", n, np.log(p))                    # (σ, block, μ)
    total = ll.max(axis=2).sum(axis=1)
    return float(s_grid[int(np.argmax(total))] * step)


def quantisation_step(x: np.ndarray) -> float | None:
    """The converter's step when the samples lie on a uniform grid (a 16-bit WAV, an 8-bit
    scope export), else None; the test is :func:`readchan.frontend.detect.quantisation_step`'s."""
    return grid_step(x) or None


@dataclass(frozen=True)
class NoiseEstimate:
    """What :func:`robust_noise` measured.

    Attributes
    ----------
    rms : noise RMS (capture units).
    used_s : time the RMS was taken over, seconds.
    pulses_excluded : isolated pulses (card edges, stray detections) left out.
    slow_excluded_s : time left out for slow excursions (AC-coupling recovery, residual
        wander) and unsteady blocks (transients), seconds.
    mask : the samples the RMS was taken over.
    """

    rms: float
    used_s: float
    pulses_excluded: int
    slow_excluded_s: float
    mask: np.ndarray | None = None


PULSE_SIGMA = 5.0
"""A quiet sample beyond this many robust σ is part of a pulse, not noise (Gaussian noise
exceeds 5σ in 6·10⁻⁷ of samples)."""

SLOW_SIGMA = 4.0
"""A smoothed quiet sample beyond this many robust σ of the smoothed noise is slow content."""

PULSE_REACH_CELLS = 4.0
"""Samples within this many typical intervals of an isolated pulse are left out of the noise."""


MAD_TO_SIGMA = 1.4826
"""σ of Gaussian noise per unit of its median absolute deviation, 1/Φ⁻¹(3/4) (the
normal-consistent MAD; Rousseeuw & Croux, JASA 88, 1993)."""

MIN_NOISE_SAMPLES = 64
"""Fewest samples a noise RMS is taken over (our choice: the RMS of 64 Gaussian samples has a
relative standard error of 1/√(2·64) ≈ 9 %)."""

SMOOTH_MIN_S = 1e-3
"""Shortest moving-average window (seconds) of the slow-content test in :func:`robust_noise`."""

SMOOTH_CELLS = 4.0
"""Moving-average window of the slow-content test in typical intervals, when longer than
:data:`SMOOTH_MIN_S` (our choice: long enough to average the noise, short beside a recovery)."""

BLOCK_MIN_S = 0.002
"""Shortest block (seconds) of the detrended noise RMS (:func:`_detrended_rms`)."""

BLOCK_CELLS = 8.0
"""Block of the detrended noise RMS in typical intervals, when longer than :data:`BLOCK_MIN_S`
(our choice: steady noise's block RMS then varies by about a tenth)."""

BLOCK_MIN_SAMPLES = 32
"""Fewest samples of a block of the detrended noise RMS."""


def robust_noise(w: np.ndarray, rate_hz: float, quiet: np.ndarray, *, cell_s: float = 1e-3,
                 step: float | None = None) -> NoiseEstimate | None:
    """Noise RMS on the quiet samples of ``w`` that isolated pulses and slow content cannot move.

    1. A robust scale σ₀ = 1.4826·MAD of the quiet samples (the normal-consistent median
       absolute deviation; Rousseeuw & Croux, JASA 88, 1993): a few pulses do not move it.
       On a converter grid of ``step`` it is at least step/2 (quantised noise a level or two
       wide has a MAD of 0 or one step).
    2. Samples within ``PULSE_REACH_CELLS`` typical intervals (``cell_s``) of a quiet sample
       beyond ``PULSE_SIGMA``·σ₀ are left out (card-edge pulses, stray detections).
    3. The rest is smoothed by a moving average over max(1 ms, 4 intervals) of the samples
       kept; where the smoothed signal leaves ±``SLOW_SIGMA`` robust σ of itself (the σ widened
       by 1/√(fraction kept) next to a stretch left out) (an AC-coupling recovery after a
       pulse, wander the baseline high-pass did not take), samples are left out too.
    4. What is left is cut into blocks of max(2 ms, 8 intervals), each with a quadratic taken
       out (slow content within a block), and blocks whose RMS exceeds 1.5× the median
       block's are left out (:func:`_detrended_rms`: transients, filter end effects).
    5. The noise is the plain RMS of the residuals (degrees of freedom counted), so every kind
       of noise counts at its full power (quantisation noise included: it is not Gaussian,
       and a MAD would misjudge it).

    Returns None when fewer than :data:`MIN_NOISE_SAMPLES` samples are left.
    """
    q = np.asarray(quiet, bool)
    if q.sum() < MIN_NOISE_SAMPLES:
        return None
    vals = w[q]
    s0 = MAD_TO_SIGMA * float(np.median(np.abs(vals - np.median(vals))))
    if step:
        s0 = max(s0, 0.5 * step)
    if not s0 > 0:
        s0 = float(np.std(vals))
    if not s0 > 0:
        return NoiseEstimate(0.0, float(q.sum()) / rate_hz, 0, 0.0)
    reach = max(1, int(PULSE_REACH_CELLS * cell_s * rate_hz))
    hot, n_pulses = _isolated_pulses(w, q, s0, reach)
    keep = q & ~hot
    m = max(8, int(max(SMOOTH_MIN_S, SMOOTH_CELLS * cell_s) * rate_hz))
    slow = _slow_content(w, keep, m, step)
    use = keep & ~slow
    if use.sum() < MIN_NOISE_SAMPLES:
        return None
    block = max(int(BLOCK_MIN_S * rate_hz), int(BLOCK_CELLS * cell_s * rate_hz), BLOCK_MIN_SAMPLES)
    rms, use, unsteady = _detrended_rms(w, use, block)
    return NoiseEstimate(rms, float(use.sum()) / rate_hz, n_pulses, float((slow.sum() + unsteady) / rate_hz), use)


def _isolated_pulses(w: np.ndarray, q: np.ndarray, s0: float, reach: int) -> tuple[np.ndarray, int]:
    """Step 2 of :func:`robust_noise`: the samples within ``reach`` samples of a quiet sample
    beyond ``PULSE_SIGMA``·``s0``, and how many pulses (clusters closer than the reach) they hold."""
    from scipy.ndimage import binary_dilation

    hot = q & (np.abs(w) > PULSE_SIGMA * s0)
    n_pulses = 0
    if hot.any():
        # one pulse per cluster of hot samples closer than the reach
        hi = np.flatnonzero(hot)
        n_pulses = int(1 + np.count_nonzero(np.diff(hi) > reach))
        hot = binary_dilation(hot, np.ones(2 * reach + 1, bool))
    return hot, n_pulses


def _slow_content(w: np.ndarray, keep: np.ndarray, m: int, step: float | None) -> np.ndarray:
    """Step 3 of :func:`robust_noise`: the kept samples where the moving average over ``m``
    samples leaves ±``SLOW_SIGMA`` robust σ of itself, widened by ``m`` on each side."""
    from scipy.ndimage import binary_dilation, uniform_filter1d

    smooth = uniform_filter1d(np.where(keep, w, 0.0), m, mode="constant")
    cnt = uniform_filter1d(keep.astype(float), m, mode="constant")
    full = keep & (cnt > 0.999)
    slow = np.zeros_like(keep)
    if full.sum() >= MIN_NOISE_SAMPLES:
        sm = smooth[full]
        s1 = MAD_TO_SIGMA * float(np.median(np.abs(sm - np.median(sm))))
        if step:
            s1 = max(s1, step / math.sqrt(12.0 * m))
        if s1 > 0:
            # next to a left-out stretch the window is partly empty: test the mean of what is
            # kept, against a scale widened by 1/√(fraction kept)
            part = keep & (cnt >= 0.5)
            with np.errstate(divide="ignore", invalid="ignore"):
                dev = np.abs(smooth / np.maximum(cnt, 1e-9) - np.median(sm)) * np.sqrt(np.maximum(cnt, 1e-9))
            slow = part & (dev > SLOW_SIGMA * s1)
            if slow.any():
                slow = binary_dilation(slow, np.ones(2 * m + 1, bool)) & keep
    return slow


UNSTEADY_RATIO = 1.5
"""A block whose RMS exceeds this × the median block RMS is not steady noise."""

DETREND_ORDER = 2
"""Degree of the polynomial taken out of each noise block (slow content within a block)."""


def _detrended_rms(w: np.ndarray, use: np.ndarray, block: int) -> tuple[float, np.ndarray, int]:
    """Noise RMS over blocks of ``block`` consecutive used samples, each with its own
    least-squares polynomial of degree ``DETREND_ORDER`` taken out (what is slow within a few
    bit cells — an AC-coupling recovery, a hum residue — is not noise), the residual sum of
    squares divided by N − (degree + 1) per block (least squares; common practice).  Blocks
    whose residual RMS exceeds ``UNSTEADY_RATIO`` × the median block's are left out (a
    transient, a filter's end effect): with blocks of at least 8 bit cells, steady noise's
    block RMS varies by about a tenth.  Returns (RMS, mask of the samples used, samples left
    out)."""
    idx = np.flatnonzero(use)
    runs = np.split(idx, np.flatnonzero(np.diff(idx) > 1) + 1)
    blocks = [r[a:a + block] for r in runs for a in range(0, r.size, block)]
    p = DETREND_ORDER + 1
    blocks = [b for b in blocks if b.size >= max(block // 2, 4 * p)]
    if not blocks:
        u = w[idx]
        return float(np.sqrt(np.mean((u - u.mean()) ** 2))), use, 0
    rss = np.empty(len(blocks))
    dof = np.empty(len(blocks))
    for i, b in enumerate(blocks):
        x = np.linspace(-1.0, 1.0, b.size)
        A = np.vander(x, p)
        y = w[b]
        coef, *_ = np.linalg.lstsq(A, y, rcond=None)
        r = y - A @ coef
        rss[i], dof[i] = float(r @ r), b.size - p
    ms = rss / dof
    good = np.ones(len(blocks), bool)
    if len(blocks) >= 3:
        good = ms <= UNSTEADY_RATIO ** 2 * np.median(ms)
    out = np.zeros_like(use)
    for i in np.flatnonzero(good):
        out[blocks[i]] = True
    return float(np.sqrt(rss[good].sum() / dof[good].sum())), out, int(use.sum() - out.sum())
