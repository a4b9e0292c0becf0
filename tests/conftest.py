"""Shared helpers: synthesize a capture of known content, decode it in memory."""

from __future__ import annotations

import os
import sys

import pytest
from hypothesis import HealthCheck, settings

from readchan.capture import Capture
from readchan.decode import DecodeSettings, decode_capture
from readchan.render import reads_of
from readchan.synth import Impairments, SpeedProfile, SynthSpec, synthesize
from readchan.synth.card import track_content

settings.register_profile("ci", max_examples=60, deadline=None,
                          suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large])
settings.register_profile("thorough", max_examples=300, deadline=None,
                          suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large])
settings.load_profile(os.environ.get("READCHAN_HYPOTHESIS", "ci"))


def run_cli(monkeypatch, capsys, *args):
    """Run the ``readchan`` command line in-process; returns (exit code, stdout, stderr)."""
    from readchan import cli

    monkeypatch.setattr(sys, "argv", ["readchan", *map(str, args)])
    with pytest.raises(SystemExit) as e:
        cli.main()
    out, err = capsys.readouterr()
    return e.value.code, out, err


def synth_capture(texts: dict[int, str], *, rate_hz=48_000.0, speed=None, imp=None, seed=0, **kw):
    """Synthesize one swipe holding ``texts`` ({track: text}); returns (Capture, SynthResult)."""
    tracks = tuple(track_content(t, track=n) for n, t in sorted(texts.items()))
    spec = SynthSpec(tracks=tracks, speed=speed or SpeedProfile(30.0), impairments=imp or Impairments(),
                     rate_hz=rate_hz, seed=seed, **kw)
    res = synthesize(spec)
    return Capture(res.samples, res.rate_hz, source="<synth>", units="FS"), res


def decode_reads(cap: Capture, **kw):
    return reads_of(decode_capture(cap, DecodeSettings(**kw)))


@pytest.fixture
def demo_texts():
    """Invented card content (the name and account number are made up; the PAN passes Luhn)."""
    return {
        1: "%B9912345678901239^QUILL/ODESSA M^2912101000000000000?",
        2: ";9912345678901239=29121010000000000?",
        3: ";011234567890123445=7247241000000000000303000000000000000000?",
    }
