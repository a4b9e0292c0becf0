#!/usr/bin/env python
"""Diagnostics on captures through a reader's front end: SNR, hum, speed, PW50 and track errors.

Every capture is synthesized with card-edge pulses and the synthesizer's front-end stage
(first-order AC coupling, a causal preamp low-pass of a given order, family and corner, audio
16-bit or 8-bit scope quantisation), then inspected.  Truth: the synthesizer's output SNR
(median |peak| after the front end over its noise after the front end, step/√12 included), the
mean of 2.54 / (density · true bit period) for speed, the head's PW50 for PW50 (the preamp
widens the pulses it passes, so the PW50 error shows that widening), the track synthesized, and
the hum amplitude times the AC coupling's gain f/√(f² + fc²) and the Butterworth preamp's gain.

Usage:  python scripts/bench_diagnostics.py [--seeds 2] [--json]
"""

from __future__ import annotations

import argparse
import itertools
import json
import math
import sys

import numpy as np

from readchan.io.capture import Capture
from readchan.measure.diagnose import inspect_capture
from readchan.synth import Impairments, SpeedProfile, SynthSpec, synthesize
from readchan.synth.card import track_content
from readchan.synth.chain import FrontEnd
from readchan.synth.head import KarlqvistPulse
from readchan.units import bit_cell_m, speed_from_period_cm_s

TEXTS = {1: "%B9912345678901239^QUILL/ODESSA M^2912101000000000000?",    # invented
         2: ";9912345678901239=29121010000000000?",
         3: ";12345678901234=5678?"}                                     # short: fits track 2 too
HEAD = KarlqvistPulse(14.5e-6, 2.15e-6, 12.4e-6)


def case(track, snr_db, speed_cm_s, lp_factor, order, family, ac_hz, scope, seed, hum_level=0.0):
    rate = 48_000.0 if speed_cm_s <= 60 else 96_000.0
    half_cell_s = bit_cell_m(75.0 if track == 2 else 210.0) / 2 / (speed_cm_s / 100)
    lp = min(lp_factor / half_cell_s, 0.45 * rate)
    fe = FrontEnd(ac_coupling_hz=ac_hz, preamp_lowpass_hz=lp, preamp_order=order, preamp_family=family,
                  quantize_bits=None if scope else 16, scope_volts_per_div=0.2 if scope else None,
                  antialias=not scope)
    band_db = 10 * math.log10(rate / 2 / lp)          # the preamp passes less noise than the output band
    imp = Impairments(snr_db=snr_db - band_db, edge_pulses=True, hum_level=hum_level)
    spec = SynthSpec(tracks=(track_content(TEXTS[track], track=track),), speed=SpeedProfile(speed_cm_s),
                     pulse=HEAD, impairments=imp, rate_hz=rate, seed=seed, lead_s=0.03 if scope else 0.05,
                     front_end=fe)
    res = synthesize(spec)
    cap = Capture(res.samples, rate, source="<bench>", units="V" if scope else "FS")
    (ch,) = inspect_capture(cap)
    row = dict(track=track, snr_db=snr_db, speed_cm_s=speed_cm_s, lp_factor=lp_factor, order=order, family=family,
               ac_hz=ac_hz, scope=scope, seed=seed, hum_level=hum_level, truth_snr_db=res.output_snr_db[0],
               read=False)
    reads = [r for r in ch.reads if r.read.valid]
    if len(reads) != 1:
        return row
    r = reads[0]
    density = 75.0 if track == 2 else 210.0
    true_speed = float(np.mean(speed_from_period_cm_s(np.diff(res.cell_times_s[0][0]), density)))
    row.update(read=True, snr_err_db=r.noise.snr_db - res.output_snr_db[0], track_got=r.read.track.number,
               basis=r.read.track_evidence.basis,
               speed_err=None if r.timing.mean_speed_cm_s is None else r.timing.mean_speed_cm_s / true_speed - 1,
               pw50_err=None if r.pulse is None or r.pulse.pw50_m is None else r.pulse.pw50_m / HEAD.pw50_m - 1)
    if hum_level:
        gain = 50.0 / math.hypot(50.0, ac_hz) / math.sqrt(1 + (50.0 / lp) ** (2 * order))
        hum = hum_level * res.median_peak[0] * gain
        fe_ = ch.front_end
        row.update(hum_hz=fe_.hum_hz, hum_err=None if fe_.hum_amplitude is None else fe_.hum_amplitude / hum - 1)
    return row


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--seeds", type=int, default=2)
    ap.add_argument("--json", action="store_true")
    a = ap.parse_args()
    rows = []
    grid = itertools.product((1, 2, 3), (15.0, 25.0, 35.0, 45.0), (20.0, 80.0), (2.2, 4.0), (2, 4),
                             ("butterworth", "bessel"), (5.0, 50.0), (False, True))
    for track, snr, v, lpf, order, fam, ac, scope in grid:
        if (order == 4) != (fam == "bessel"):           # Butterworth order 2 and Bessel order 4 only
            continue
        for seed in range(a.seeds):
            rows.append(case(track, snr, v, lpf, order, fam, ac, scope, seed))
    for level, track, seed in itertools.product((0.05, 0.2, 0.5), (1, 2, 3), range(a.seeds)):
        rows.append(case(track, 35.0, 30.0, 2.2, 2, "butterworth", 20.0, False, 100 + seed, hum_level=level))
    if a.json:
        print(json.dumps(rows, indent=1))
        return 0
    ok = [r for r in rows if r["read"]]
    snr = np.array([r["snr_err_db"] for r in ok if not r["hum_level"]])
    print(f"captures {len(rows)}, read {len(ok)}")
    print(f"SNR error dB: max |err| {np.max(np.abs(snr)):.2f}, 95th pct |err| {np.percentile(np.abs(snr), 95):.2f}, "
          f"within ±1 dB {np.mean(np.abs(snr) <= 1):.1%} of {snr.size}")
    for lo, hi in ((14, 20), (20, 30), (30, 40), (40, 46)):
        sel = np.array([r["snr_err_db"] for r in ok if not r["hum_level"] and lo <= r["truth_snr_db"] < hi])
        if sel.size:
            print(f"  truth {lo}-{hi} dB: n {sel.size}, mean {sel.mean():+.2f}, max |err| {np.max(np.abs(sel)):.2f}")
    right = [r for r in ok if r["track_got"] == r["track"]]
    amb = [r for r in ok if r["basis"] == "ambiguous"]
    wrong = [r for r in ok if r["track_got"] != r["track"]]
    print(f"track: right {len(right)}/{len(ok)}, ambiguous {len(amb)}, wrong {len(wrong)}"
          + (f" (e.g. {wrong[0]})" if wrong else ""))
    sp = np.array([r["speed_err"] for r in right if r["speed_err"] is not None])
    print(f"speed error (right track): max |err| {np.max(np.abs(sp)):.2%}, median {np.median(sp):+.2%}")
    pw = np.array([r["pw50_err"] for r in ok if r["pw50_err"] is not None and r["track_got"] == r["track"]])
    print(f"PW50 vs the head's: median {np.median(pw):+.1%}, range {pw.min():+.1%} to {pw.max():+.1%} "
          "(the preamp widens the pulses)")
    hum = [r for r in ok if r["hum_level"]]
    if hum:
        dh = np.array([abs(r["hum_hz"] - 50.0) if r["hum_hz"] else np.inf for r in hum])
        he = np.array([abs(r["hum_err"]) if r["hum_err"] is not None else np.inf for r in hum])
        print(f"hum: frequency max |err| {dh.max():.3f} Hz, level max |err| {he.max():.1%} over {len(hum)} captures")
    return 0


if __name__ == "__main__":
    sys.exit(main())
