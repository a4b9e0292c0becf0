"""Negative captures: signals that hold no timecode and no cassette data never give a valid read
with a frame or a byte.

The signals are built here, independently of the synthesizers: programme-like audio (notes
with harmonics under an envelope, plus noise), a steady tone, mains hum, white noise, a
Kansas City mark leader that never becomes data (2400 Hz, BYTE Feb. 1976), and random
biphase-mark bits (SMPTE ST 12-1 modulation) with the sync word removed in both directions.
"""

from __future__ import annotations

import numpy as np
import pytest

from readchan.formats.kcs.read import decode_kcs
from readchan.formats.ltc import decode_ltc
from readchan.linecode.biphase import biphase_positions
from readchan.formats.ltc.word import SYNC_REVERSED, SYNC_WORD

RATE_HZ = 48_000.0


def programme(seconds=3.0, seed=1):
    rng = np.random.default_rng(seed)
    t = np.arange(int(seconds * RATE_HZ)) / RATE_HZ
    x = np.zeros_like(t)
    note_s = 0.25
    for k in range(int(seconds / note_s)):
        f0 = 110.0 * 2 ** (rng.integers(0, 36) / 12)
        sl = (t >= k * note_s) & (t < (k + 1) * note_s)
        tt = t[sl] - k * note_s
        env = np.exp(-tt * 6.0)
        for h in range(1, 6):
            x[sl] += env * rng.uniform(0.1, 1.0) / h * np.sin(2 * np.pi * f0 * h * tt + rng.uniform(0, 6.3))
    return 0.3 * x + rng.normal(0, 0.01, t.size)


def tone(hz, seconds=2.0, level=0.5):
    t = np.arange(int(seconds * RATE_HZ)) / RATE_HZ
    return level * np.sin(2 * np.pi * hz * t + 0.3)


def hum(seconds=2.0):
    t = np.arange(int(seconds * RATE_HZ)) / RATE_HZ
    return 0.4 * np.sin(2 * np.pi * 50 * t) + 0.1 * np.sin(2 * np.pi * 150 * t + 1.0) + 0.05 * np.sin(2 * np.pi * 250 * t)


def noise(seconds=2.0):
    return np.random.default_rng(5).normal(0, 0.2, int(seconds * RATE_HZ))


def biphase_without_sync(seconds=2.0, bit_rate=2000.0, seed=7):
    rng = np.random.default_rng(seed)
    bits = rng.integers(0, 2, int(seconds * bit_rate)).astype(np.uint8)
    for pattern in (SYNC_WORD, SYNC_REVERSED):
        changed = True
        while changed:
            win = np.lib.stride_tricks.sliding_window_view(bits, 16)
            hits = np.flatnonzero((win == pattern).all(axis=1))
            changed = hits.size > 0
            bits[hits + 7] ^= 1                      # break every twelve-1 run of a match
    pos, _ = biphase_positions(bits)
    edges = 0.001 + pos / bit_rate
    t = np.arange(int((seconds + 0.01) * RATE_HZ)) / RATE_HZ
    return 0.5 * np.where(np.searchsorted(edges, t) % 2 == 0, -1.0, 1.0)


NEGATIVES = {
    "programme": programme,
    "steady 1 kHz tone": lambda: tone(1000.0),
    "steady 2400 Hz mark leader": lambda: tone(2400.0),
    "steady 1200 Hz tone": lambda: tone(1200.0),
    "mains hum": hum,
    "white noise": noise,
    "biphase bits without a sync word": biphase_without_sync,
}


@pytest.mark.parametrize("name", sorted(NEGATIVES))
def test_no_timecode_frame_in_a_negative_capture(name):
    r = decode_ltc(NEGATIVES[name](), RATE_HZ)
    assert r.frames == () and not r.valid


@pytest.mark.parametrize("name", sorted(NEGATIVES))
def test_no_cassette_byte_in_a_negative_capture(name):
    r = decode_kcs(NEGATIVES[name](), RATE_HZ)
    assert r.data == b"" and not r.valid


def card_swipe():
    """A synthesized three-track card swipe (invented content), the card channel's own model."""
    from readchan.synth import SpeedProfile, SynthSpec, synthesize
    from readchan.synth.card import track_content

    tracks = (track_content("%B9912345678901239^QUILL/ODESSA M^2912101000000000000?", track=1),
              track_content(";9912345678901239=29121010000000000?", track=2))
    return synthesize(SynthSpec(tracks=tracks, speed=SpeedProfile(30.0), rate_hz=RATE_HZ, swipes=3, seed=2)).samples


@pytest.mark.parametrize("channel", [0, 1])
def test_card_swipe_gives_no_tape_read(channel):
    x = card_swipe()
    assert decode_ltc(x, RATE_HZ, channel=channel).frames == ()
    assert decode_kcs(x, RATE_HZ, channel=channel).data == b""


def test_cassette_capture_gives_no_timecode_and_timecode_gives_no_bytes():
    from readchan.synth.kcs import KcsSpec, synthesize_kcs
    from readchan.synth.ltc import LtcSpec, synthesize_ltc

    for baud in (300, 1200):
        kcs = synthesize_kcs(KcsSpec(data=bytes(range(200)), baud=baud))
        assert decode_ltc(kcs.samples, kcs.rate_hz).frames == ()
    for rate in (25.0, 30.0):            # 30 fps is 2400 bit/s: its cells last one 2400 Hz half cycle
        ltc = synthesize_ltc(LtcSpec(duration_s=2.0, rate_fps=rate, signal="line"))
        assert decode_kcs(ltc.samples, ltc.rate_hz).data == b""
