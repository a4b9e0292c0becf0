"""Shared helpers: synthesize a capture of known content, decode it in memory."""

from __future__ import annotations

import os
import random
import sys

import pytest
from hypothesis import HealthCheck, settings

from readchan.io.capture import Capture
from readchan.channel import DecodeSettings, decode_capture
from readchan.report.render import reads_of
from readchan.synth import Impairments, SpeedProfile, SynthSpec, synthesize
from readchan.synth.card import track_content

# Hypothesis profiles (README, "Tests"):
# * ``ci`` (the default, what ``python -m pytest -q`` and .ci/run use): derandomised, so every
#   test draws the same examples on every run (its seed is fixed by the test itself), and no
#   example database, so nothing a previous run saved changes what this one draws.
# * ``thorough`` (``READCHAN_HYPOTHESIS=thorough``, for local runs): five times the examples,
#   a fresh random seed per session (``READCHAN_HYPOTHESIS_SEED=N`` repeats one) and the local
#   example database.  A failure it finds is pinned in the test as an explicit ``@example``.
# The profile and seed are printed in the pytest header (at the end of the run with -q).
_COMMON = dict(deadline=None, print_blob=True,
               suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large])
settings.register_profile("ci", max_examples=60, derandomize=True, database=None, **_COMMON)
settings.register_profile("thorough", max_examples=300, derandomize=False, **_COMMON)
PROFILE = os.environ.get("READCHAN_HYPOTHESIS", "ci")
if PROFILE not in ("ci", "thorough"):
    raise pytest.UsageError(f"READCHAN_HYPOTHESIS must be ci or thorough, was {PROFILE!r}")
settings.load_profile(PROFILE)
SEED: int | None = None
if PROFILE == "thorough":
    _given_seed = os.environ.get("READCHAN_HYPOTHESIS_SEED")
    SEED = int(_given_seed) if _given_seed else random.SystemRandom().randrange(2 ** 32)


@pytest.hookimpl(tryfirst=True)
def pytest_configure(config):
    # hypothesis's own option --hypothesis-seed forces one seed for every test; fill it in
    # (before its plugin reads it) unless it was given on the command line
    if SEED is not None and getattr(config.option, "hypothesis_seed", None) is None:
        config.option.hypothesis_seed = str(SEED)


def pytest_report_header(config):
    return _hypothesis_line(config)


def pytest_terminal_summary(terminalreporter, exitstatus, config):
    if config.option.verbose < 0:          # -q prints no header: say it at the end instead
        terminalreporter.write_line(_hypothesis_line(config))


def _hypothesis_line(config) -> str:
    if PROFILE == "ci":
        return (f"hypothesis: profile 'ci', {settings().max_examples} examples, derandomize=True "
                f"(each test's seed fixed by the test), database off; READCHAN_HYPOTHESIS=thorough "
                f"for the local profile")
    seed = getattr(config.option, "hypothesis_seed", None) or SEED
    return (f"hypothesis: profile 'thorough', {settings().max_examples} examples, seed {seed} "
            f"(repeat with READCHAN_HYPOTHESIS=thorough READCHAN_HYPOTHESIS_SEED={seed})")


def run_cli(monkeypatch, capsys, *args):
    """Run the ``readchan`` command line in-process; returns (exit code, stdout, stderr)."""
    from readchan.cli import main as cli

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


BENCH_TRACK2 = ";9912345678901239=29121010000000000?"     # invented card


def write_track2_swipes(path, swipes: int = 6):
    """Write ``swipes`` track 2 swipes 1.5 s apart (invented card, 30 cm/s ± 20 %, 32 dB SNR)
    to ``path`` as a 16-bit WAV; returns the synthesis result."""
    from readchan.io.capture import write_capture

    spec = SynthSpec(tracks=(track_content(BENCH_TRACK2, track=2),), speed=SpeedProfile(30.0, "swipe", 0.2),
                     swipes=swipes, gap_s=1.5, impairments=Impairments(snr_db=32.0), seed=11)
    res = synthesize(spec)
    write_capture(path, res.samples, res.rate_hz, kind="wav16")
    return res
