#!/usr/bin/env python
"""False-accept benchmark: decode damaged captures of known content, count valid wrong reads.

A false accept is a read reported valid whose text is not what was recorded (for two cards
cut together: not the text of either card).  Every capture is a synthesized swipe of invented
content on track 1, 2 or 3 (cycling), forwards or backwards (alternating), damaged in one of
the ways below; each is decoded in its track's format and its reads are sorted into correct
(valid, right text), rejected (no valid read) and false accepts.

Content: track 1 in ISO/IEC 7813 format B and track 2 in the ISO/IEC 7813 track 2 layout with
invented Luhn-valid account numbers (so the field check takes part), track 3 random digits.
Swipes: 15–60 cm/s, constant, ramp or hand-swipe profile, up to ±25 % along the card,
jitter up to ±3 %, SNR 26–40 dB, 96 kHz (tracks 1 and 3) or 48 kHz (track 2).

Kinds of damage:

* ``flips k``, ``flips in one char``: recorded bits flipped (the card was written wrong).
* ``cut at a bit boundary``: card A up to a cell boundary inside its data, then card B (other
  content, its own swipe) from the same bit on.
* ``cut at a sample``: card A up to a random sample inside its data, then card B from the same
  card position plus a random fraction of a cell.
* ``cut, same swipe``: A and B swiped identically (same speed, seed and timing), cut at a
  random sample: the capture is, to within the noise, a recording of a card that holds A's text
  on one side of the cut and B's on the other (see the README: no decoder can tell).
* ``reversed stretch``: 2–15 characters' worth of samples reversed in time.
* ``impulse bursts k`` (k = 1–3): bursts of 2–6 spikes of random sign, 0.5–2 × the pulse
  peak, within a cell or two.
* ``crosstalk``: another card's swipe (other content, speed and timing) added at −30 to −3 dB.
* ``resampled``: the capture resampled by a factor of 0.7–1.4 but read at the original rate.
* ``wow``: the time axis modulated sinusoidally (±2–8 % of speed at 3–30 Hz).
* ``tone at the bit rate``: a sine at the mean bit rate (or half of it), 0.2–1 × the peak.
* ``heavy clipping``: clipped at 5–30 % of the pulse peak.
* ``dropout``: the signal attenuated to 0–5 % over 1–20 cells in the data.
* ``extra pulses k``, ``SNR x dB``, ``jitter 0.2``: stray head pulses, heavy noise, jitter.

Usage: python scripts/bench_false_accept.py [--trials N] [--workers W] [--seed S] [--json]
"""

from __future__ import annotations

import argparse
import json
import os
import sys
import time

import numpy as np

from readchan.channel import DecodeSettings, decode_channel
from readchan.formats.iso7813 import luhn_check_digit
from readchan.formats.iso7811.charset import TRACKS
from readchan.evaluate.runner import run_jobs
from readchan.evaluate.scenario import random_text
from readchan.synth import Impairments, SpeedProfile, SynthSpec, TrackContent, synthesize
from readchan.synth.card import track_content

KINDS = ("flips 2", "flips 3", "flips in one char", "cut at a bit boundary", "cut at a sample",
         "cut, same swipe", "reversed stretch", "impulse bursts 1", "impulse bursts 2", "impulse bursts 3",
         "crosstalk", "resampled", "wow", "tone at the bit rate", "heavy clipping", "dropout",
         "extra pulses 3", "SNR 10 dB", "jitter 0.2")
"""Every kind of damage, in table order."""

SEAMLESS = "cut, same swipe"
"""The splice no decoder can see (the capture is a recording of the spliced card)."""

SURNAMES = ("QUILL", "VARGO", "ONDRAK", "PELLIS", "TORVANE", "MIREL", "KASPO", "ULM", "DERRIK")
GIVEN = ("ODESSA", "IVO", "TIRA", "BENNO", "SAFI", "LORCAN", "MEDA", "JUNO")


def invented_content(track: int, rng: np.random.Generator) -> str:
    """Invented track text: a 7813 layout on tracks 1 and 2 (Luhn-valid account number with
    the made-up prefix 99), random digits on track 3."""
    if track == 3:
        return random_text(3, int(rng.integers(20, TRACKS[3].max_chars - 3)), rng)
    body = "99" + "".join(rng.choice(list("0123456789"), int(rng.integers(11, 17))))
    pan = body + luhn_check_digit(body)
    expiry = f"{int(rng.integers(26, 40)):02d}{int(rng.integers(1, 13)):02d}"
    service = "".join(rng.choice(list("0123456789"), 3))
    if track == 1:
        name = f"{rng.choice(SURNAMES)}/{rng.choice(GIVEN)}"
        room = TRACKS[1].max_chars - 3 - (2 + len(pan) + 1 + len(name) + 1 + 7)
        disc = "".join(rng.choice(list("0123456789"), int(rng.integers(0, max(1, room)))))
        return f"%B{pan}^{name}^{expiry}{service}{disc}?"
    room = TRACKS[2].max_chars - 3 - (1 + len(pan) + 1 + 7)
    disc = "".join(rng.choice(list("0123456789"), int(rng.integers(0, max(1, room)))))
    return f";{pan}={expiry}{service}{disc}?"


def _swipe(rng: np.random.Generator) -> tuple[SpeedProfile, float, float]:
    """A random swipe: (speed profile, jitter, SNR dB)."""
    kind = str(rng.choice(["constant", "ramp", "swipe"]))
    var = 0.0 if kind == "constant" else float(rng.uniform(0.0, 0.25))
    return SpeedProfile(float(rng.uniform(15.0, 60.0)), kind, var), float(rng.uniform(0.0, 0.03)), \
        float(rng.uniform(26.0, 40.0))


def _render(text: str | None, bits: np.ndarray | None, track: int, speed: SpeedProfile, imp: Impairments,
            rate: float, seed: int):
    tc = track_content(text, track=track) if bits is None else TrackContent(bits, TRACKS[track].density_bpi)
    return synthesize(SynthSpec(tracks=(tc,), speed=speed, impairments=imp, rate_hz=rate, seed=seed))


def damaged_capture(kind: str, track: int, reverse: bool, rng: np.random.Generator):
    """(samples, rate_hz, recorded texts) of one damaged capture."""
    # Stays whole: one short branch per kind of damage, all sharing the swipe's rendering, its
    # cell times and the random stream (whose order fixes the benchmark's numbers).
    spec_t = TRACKS[track]
    rate = 48_000.0 if track == 2 else 96_000.0
    truth = invented_content(track, rng)
    tc = track_content(truth, track=track)
    bits = tc.bits.copy()
    bpc = spec_t.fmt.bits_per_char
    first = spec_t.leading_zeros
    n_codes = (bits.size - first - spec_t.trailing_zeros) // bpc
    speed, jitter, snr = _swipe(rng)
    if kind == "SNR 10 dB":
        snr = 10.0
    if kind == "jitter 0.2":
        jitter = 0.2
    imp = Impairments(jitter=jitter, snr_db=snr, reverse=reverse, invert=bool(rng.integers(2)))
    truths = [truth]
    if kind.startswith("flips"):
        if kind == "flips in one char":
            c = int(rng.integers(1, n_codes - 2))
            where = first + c * bpc + rng.choice(spec_t.fmt.data_bits, 2, replace=False)
        else:
            where = first + rng.choice(n_codes * bpc, int(kind.split()[1]), replace=False)
        bits[where] ^= 1
    seed = int(rng.integers(2**31))
    res = _render(None, bits, track, speed, imp, rate, seed)
    x = res.samples[:, 0].copy()
    peak = res.median_peak[0]
    cells = res.cell_times_s[0][0]                  # in time order
    n_cells = cells.size - 1
    # the data's cell indices in time order (a reverse swipe meets the LRC first)
    lo_c, hi_c = (first, first + n_codes * bpc) if not reverse else (n_cells - first - n_codes * bpc, n_cells - first)
    cell_s = float(np.median(np.diff(cells)))

    def t_of_cell(k: float) -> float:
        return float(np.interp(k, np.arange(cells.size), cells))

    if kind.startswith("cut"):
        other = invented_content(track, rng)
        truths.append(other)
        if kind == "cut, same swipe":
            y = _render(other, None, track, speed, imp, rate, seed).samples[:, 0]
            cut = int(rng.uniform(t_of_cell(lo_c + 4), t_of_cell(hi_c - 4)) * rate)
            shift = 0
        else:
            speed_b, jitter_b, _ = _swipe(rng)
            imp_b = Impairments(jitter=jitter_b, snr_db=snr, reverse=reverse, invert=bool(rng.integers(2)))
            rb = _render(other, None, track, speed_b, imp_b, rate, int(rng.integers(2**31)))
            y = rb.samples[:, 0] * (peak / rb.median_peak[0])
            cells_b = rb.cell_times_s[0][0]
            k = int(rng.integers(lo_c + 4, hi_c - 4))
            if kind == "cut at a bit boundary":
                cut = int(round(t_of_cell(k) * rate))
                start_b = int(round(float(cells_b[k]) * rate)) if k < cells_b.size else y.size
            else:
                frac = float(rng.uniform(0, 1))
                cut = int(t_of_cell(k + frac) * rate)
                kb = min(k + frac + float(rng.uniform(0, 1)), cells_b.size - 1)
                start_b = int(np.interp(kb, np.arange(cells_b.size), cells_b) * rate)
            shift = start_b - cut
        tail = y[cut + shift:] if cut + shift >= 0 else np.concatenate((np.zeros(-(cut + shift)), y))
        x = np.concatenate((x[:cut], tail))
    elif kind == "reversed stretch":
        k = int(rng.integers(lo_c, max(lo_c + 1, hi_c - 2 * bpc)))
        n = int(rng.integers(2 * bpc, 15 * bpc + 1))
        a, b = int(t_of_cell(k) * rate), int(t_of_cell(min(k + n, hi_c)) * rate)
        a += int(rng.integers(0, max(1, int(cell_s * rate))))
        x[a:b] = x[a:b][::-1].copy()
    elif kind.startswith("impulse bursts"):
        for _ in range(int(kind.split()[2])):
            t0 = rng.uniform(t_of_cell(lo_c), t_of_cell(hi_c))
            for _ in range(int(rng.integers(2, 7))):
                i = int((t0 + rng.uniform(0, 2 * cell_s)) * rate)
                w = int(rng.integers(1, 4))
                x[i:i + w] += rng.choice([-1.0, 1.0]) * rng.uniform(0.5, 2.0) * peak
    elif kind == "crosstalk":
        other = invented_content(track, rng)
        truths.append(other)            # a read of the other card is no false accept
        speed_b, jitter_b, _ = _swipe(rng)
        rb = _render(other, None, track, speed_b, Impairments(jitter=jitter_b, reverse=bool(rng.integers(2))),
                     rate, int(rng.integers(2**31)))
        y = rb.samples[:, 0] * (peak / rb.median_peak[0]) * 10 ** (rng.uniform(-30.0, -3.0) / 20)
        off = int(rng.integers(-y.size // 4, y.size // 4))
        y = np.roll(np.pad(y, (0, max(0, x.size - y.size)))[: x.size], off)
        x = x + y
    elif kind == "resampled":
        f = float(rng.uniform(0.7, 1.4))
        n = int(x.size * f)
        x = np.interp(np.arange(n) / f, np.arange(x.size), x)
    elif kind == "wow":
        depth, f_hz = float(rng.uniform(0.02, 0.08)), float(rng.uniform(3.0, 30.0))
        t = np.arange(x.size) / rate
        src = t + depth / (2 * np.pi * f_hz) * np.sin(2 * np.pi * f_hz * t + rng.uniform(0, 2 * np.pi))
        x = np.interp(src * rate, np.arange(x.size), x)
    elif kind == "tone at the bit rate":
        f = (1.0 if rng.integers(2) else 0.5) / cell_s
        t = np.arange(x.size) / rate
        x = x + rng.uniform(0.2, 1.0) * peak * np.sin(2 * np.pi * f * t + rng.uniform(0, 2 * np.pi))
    elif kind == "heavy clipping":
        c = rng.uniform(0.05, 0.3) * peak
        x = np.clip(x, -c, c)
    elif kind == "dropout":
        k = float(rng.uniform(lo_c, hi_c))
        a, b = int(t_of_cell(k) * rate), int(t_of_cell(min(k + rng.uniform(1, 20), n_cells)) * rate)
        x[a:b] *= rng.uniform(0.0, 0.05)
    elif kind.startswith("extra pulses"):
        t = np.arange(x.size) / rate
        w = res.pw50_m / (speed.mean_cm_s * 0.01)
        for _ in range(int(kind.split()[2])):
            t0 = rng.uniform(t_of_cell(lo_c), t_of_cell(hi_c))
            x += rng.choice([-1.0, 1.0]) * peak / (1 + (2 * (t - t0) / w) ** 2)
    return x, rate, truths


def trial(seed: int, ki: int, k: int, field_check: bool = True) -> tuple[int, int, int]:
    """(correct, rejected, false accepts) of capture ``k`` of kind ``KINDS[ki]``."""
    rng = np.random.default_rng(np.random.SeedSequence([seed, ki, k]))
    track = 1 + k % 3
    reverse = bool((k // 3) % 2)
    x, rate, truths = damaged_capture(KINDS[ki], track, reverse, rng)
    settings = DecodeSettings(fmt=TRACKS[track].fmt, track=track, field_check=field_check)
    cr = decode_channel(x, rate, settings, source="<damaged>")
    valid = [r.frame.text for r in cr.reads if r.valid]
    fa = sum(v not in truths for v in valid)
    ok = int(bool(valid) and valid[0] in truths)
    return ok, int(not valid), fa


def _job(seed: int, job: tuple[int, int]) -> tuple[int, int, tuple[int, int, int]]:
    ki, k = job
    return ki, k, trial(seed, ki, k)


def run(trials: int, seed: int = 0, workers: int = 1, kinds: tuple[str, ...] = KINDS) -> dict:
    """Tally per kind: {kind: [correct, rejected, false accepts]}, and the false-accept cases."""
    jobs = [(KINDS.index(name), k) for name in kinds for k in range(trials)]
    tally = {name: [0, 0, 0] for name in kinds}
    cases = []
    done = run_jobs(_job, jobs, shared=(seed,), workers=workers)
    for ki, k, r in done:
        row = tally[KINDS[ki]]
        for j in range(3):
            row[j] += r[j]
        if r[2]:
            cases.append((KINDS[ki], k))
    return {"tally": tally, "false_accept_cases": cases}


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--trials", type=int, default=340, help="captures per kind of damage (default 340)")
    ap.add_argument("--workers", type=int, default=None, help="worker processes (default all cores)")
    ap.add_argument("--seed", type=int, default=0, help="base seed (default 0)")
    ap.add_argument("--json", action="store_true", help="print the tally as one JSON object")
    args = ap.parse_args(argv)
    if args.trials < 1:
        print("bench_false_accept: error: --trials must be ≥ 1", file=sys.stderr)
        return 2
    workers = args.workers or os.cpu_count() or 1
    t0 = time.perf_counter()
    result = run(args.trials, args.seed, workers)
    elapsed = time.perf_counter() - t0
    tally = result["tally"]
    total = np.sum(list(tally.values()), axis=0)
    if args.json:
        print(json.dumps({**result, "total": total.tolist(), "elapsed_s": elapsed, "workers": workers}, indent=2))
        return 0
    from rich.console import Console
    from rich.table import Table

    out = Console(width=120) if not sys.stdout.isatty() else Console()
    t = Table(title=f"damaged captures, {args.trials} per kind (tracks 1–3, both directions)")
    for col in ("damage", "correct", "rejected", "false accepts"):
        t.add_column(col, justify="left" if col == "damage" else "right")
    for name, (ok, rej, fa) in tally.items():
        t.add_row(name, str(ok), str(rej), str(fa))
    t.add_section()
    seamless = np.asarray(tally[SEAMLESS])
    t.add_row(f"all but '{SEAMLESS}' ({args.trials * (len(tally) - 1)})", *(str(v) for v in total - seamless))
    t.add_row(f"all ({args.trials * len(tally)})", *(str(v) for v in total))
    out.print(t)
    if result["false_accept_cases"]:
        out.print("false accepts (kind, capture): " + ", ".join(f"{a} #{b}" for a, b in result["false_accept_cases"]))
    out.print(f"{elapsed:.1f} s on {workers} worker(s)")
    return 0


if __name__ == "__main__":
    sys.exit(main())
