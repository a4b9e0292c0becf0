#!/usr/bin/env python
"""Golden decode outputs: record, or compare against, what the decoder says today.

The set is every shipped fixture (through the command line, ``decode --json --unmask``) and a
fixed, seeded set of synthesized captures that draws every impairment the synthesizer has
(density error, jitter, noise, hum, wander, DC, AC coupling, clipping, inversion, reversal),
every track, three speed profiles, both pulse models, several sample rates, multi-swipe and
multi-track captures and the flux (logic-level) output.  A restructuring of the package must
leave these outputs identical; a key added to a read is allowed (the comparison checks that
every recorded key is still there with the same value).

A second set, ``tests/golden/tape.json``, holds seeded tape captures (timecode at crawl to
shuttle speeds, both directions, line level and raw head, edits and splices, noise, hum and the
playback band; cassette data at both baud rates with speed offsets, wow and flutter, idle bits
and dropouts), decoded with no ``--format`` as ``decode --json`` renders them.

Usage:
    python scripts/golden.py record [--out tests/golden/decode.json] [--cases 220]
    python scripts/golden.py record-tape [--out tests/golden/tape.json] [--cases 40]
    python scripts/golden.py check  [--golden tests/golden/decode.json] [--tape tests/golden/tape.json]
"""

from __future__ import annotations

import argparse
import io
import json
import sys
from contextlib import redirect_stdout
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
GOLDEN = ROOT / "tests" / "golden" / "decode.json"
TAPE_GOLDEN = ROOT / "tests" / "golden" / "tape.json"
FIXTURES = ROOT / "fixtures"
CAPTURE_SUFFIXES = (".wav", ".flac", ".aiff", ".csv")
FLOAT_TOLERANCE = 2e-6
"""Largest difference of a recorded number (relative above 1, else absolute) that counts as equal."""
ALPHA = "ABCDEFGHIJKLMNOPQRSTUVWXYZ0123456789 /-."


def _random_text(rng: np.random.Generator, track: int) -> str:
    """Invented card-like content (99 prefix: no issuer's range, a Luhn check digit) for one track."""
    from readchan.formats.iso7813 import luhn_check_digit

    digits = "".join(rng.choice(list("0123456789"), size=int(rng.integers(6, 17))))
    pan = "99" + digits
    pan += luhn_check_digit(pan)
    if track == 1:
        name = "".join(rng.choice(list(ALPHA[:26]), size=int(rng.integers(3, 9))))
        disc = "".join(rng.choice(list("0123456789"), size=int(rng.integers(0, 10))))
        return f"%B{pan}^{name}/DEMO^{int(rng.integers(24, 40)):02d}{int(rng.integers(1, 13)):02d}101{disc}?"
    disc = "".join(rng.choice(list("0123456789"), size=int(rng.integers(0, 12))))
    return f";{pan}={int(rng.integers(24, 40)):02d}{int(rng.integers(1, 13)):02d}101{disc}?"


def synth_cases(n: int) -> list[dict]:
    """The seeded case list: plain dicts, so that the set itself is recorded beside the outputs."""
    rng = np.random.default_rng(20261202)
    cases = []
    for i in range(n):
        tracks = [int(rng.integers(1, 4))] if rng.random() < 0.8 else [1, 2, 3]
        imp = {}
        draw = lambda p: rng.random() < p  # noqa: E731
        if draw(0.3):
            imp["density_error"] = round(float(rng.uniform(-0.05, 0.05)), 4)
        if draw(0.4):
            imp["jitter"] = round(float(rng.uniform(0, 0.1)), 4)
        if draw(0.6):
            imp["snr_db"] = round(float(rng.uniform(14, 45)), 2)
        if draw(0.25):
            imp["hum_hz"] = float(rng.choice([50.0, 60.0]))
            imp["hum_level"] = round(float(rng.uniform(0.02, 0.35)), 3)
        if draw(0.2):
            imp["wander_hz"] = round(float(rng.uniform(0.5, 5)), 2)
            imp["wander_level"] = round(float(rng.uniform(0.05, 0.5)), 3)
        if draw(0.15):
            imp["dc_offset"] = round(float(rng.uniform(-0.2, 0.2)), 3)
        if draw(0.2):
            imp["highpass_hz"] = round(float(rng.uniform(5, 50)), 1)
        if draw(0.15):
            imp["clip"] = round(float(rng.uniform(0.6, 0.95)), 3)
        imp["invert"] = bool(draw(0.3))
        imp["reverse"] = bool(draw(0.4))
        cases.append({
            "id": f"synth-{i:03d}",
            "texts": {str(t): _random_text(rng, t) for t in tracks},
            "speed_cm_s": round(float(rng.uniform(12, 140)), 2),
            "profile": str(rng.choice(["constant", "ramp", "swipe"])),
            "variation": round(float(rng.uniform(0, 0.4)), 3),
            "pulse": str(rng.choice(["karlqvist", "lorentzian"], p=[0.7, 0.3])),
            "rate_hz": float(rng.choice([44_100.0, 48_000.0, 96_000.0], p=[0.3, 0.5, 0.2])),
            "swipes": int(rng.choice([1, 1, 1, 2])),
            "output": "flux" if draw(0.08) else "head",
            "seed": int(rng.integers(0, 2**31)),
            "impairments": imp,
        })
    return cases


def _capture(case: dict):
    from readchan.io.capture import Capture
    from readchan.synth import Impairments, SpeedProfile, SynthSpec, synthesize
    from readchan.synth.card import track_content
    from readchan.synth.head import KarlqvistPulse, LorentzianPulse

    tracks = tuple(track_content(t, track=int(n)) for n, t in sorted(case["texts"].items()))
    pulse = KarlqvistPulse() if case["pulse"] == "karlqvist" else LorentzianPulse()
    spec = SynthSpec(tracks=tracks, speed=SpeedProfile(case["speed_cm_s"], case["profile"], case["variation"]),
                     pulse=pulse, rate_hz=case["rate_hz"], impairments=Impairments(**case["impairments"]),
                     swipes=case["swipes"], output=case["output"], seed=case["seed"])
    res = synthesize(spec)
    return Capture(res.samples, res.rate_hz, source=case["id"], units="FS")


def decode_synth(case: dict) -> list[dict]:
    """The reads of one synthesized case, as ``decode --json --unmask`` renders them."""
    from readchan.channel import decode_capture
    from readchan.report.render import read_dict, reads_of

    return [read_dict(r, unmask=True) for r in reads_of(decode_capture(_capture(case)))]


def tape_cases(n: int) -> list[dict]:
    """The seeded tape case list (plain dicts): timecode and cassette captures, alternating."""
    rng = np.random.default_rng(20261203)
    cases = []
    for i in range(n):
        play = {}
        if rng.random() < 0.5:
            play["snr_db"] = round(float(rng.uniform(25, 45)), 1)
        if rng.random() < 0.2:
            play["hum_level"] = round(float(rng.uniform(0.02, 0.2)), 3)
        if rng.random() < 0.2:
            play["band_hz"] = [300.0, 3500.0] if i % 2 else [50.0, 15000.0]
        if rng.random() < 0.2:
            play["invert"] = True
        base = {"id": f"tape-{i:03d}", "seed": int(rng.integers(0, 2**31)), "playback": play}
        wow = {"wow_depth": round(float(rng.uniform(0, 0.01)), 4), "wow_hz": 0.5,
               "flutter_depth": round(float(rng.uniform(0, 0.003)), 4), "flutter_hz": 12.0}
        if i % 2 == 0:
            speed = str(rng.choice(["constant", "slow", "ramp", "shuttle"]))
            rate_fps = float(rng.choice([24.0, 25.0, 29.97, 30.0]))
            edit = None
            if rng.random() < 0.3:
                edit = {"at_frame": int(rng.integers(3, 12)), "kind": str(rng.choice(["jump", "splice", "repeat"])),
                        "to": "02:10:00:00"}
            cases.append({**base, "format": "ltc", "rate_fps": rate_fps,
                          "start": f"{int(rng.integers(0, 24)):02d}:{int(rng.integers(0, 60)):02d}:"
                                   f"{int(rng.integers(0, 60)):02d}{';' if rate_fps == 29.97 else ':'}10",
                          "speed": speed, "reverse": bool(rng.random() < 0.3),
                          "signal": str(rng.choice(["line", "head"], p=[0.7, 0.3])), "edit": edit, "wow": wow})
        else:
            cases.append({**base, "format": "kcs", "baud": int(rng.choice([300, 1200])),
                          "data": rng.integers(0, 256, int(rng.integers(4, 40))).astype(np.uint8).tobytes().hex(),
                          "speed_factor": round(float(rng.uniform(0.9, 1.1)), 3),
                          "idle_bits": round(float(rng.choice([0.0, 0.5, 2.0])), 1), "wow": wow,
                          "dropout": bool(rng.random() < 0.2)})
    return cases


def _tape_capture(case: dict):
    from readchan.io.capture import Capture
    from readchan.synth.kcs import KcsSpec, synthesize_kcs
    from readchan.synth.ltc import LtcEdit, LtcSpec, synthesize_ltc
    from readchan.synth.playback import Playback, PlaySpeed

    play = dict(case["playback"])
    if "band_hz" in play:
        play["band_hz"] = tuple(play["band_hz"])
    if case["format"] == "ltc":
        w = case["wow"]
        speed = {"constant": PlaySpeed.constant(1.0, **w), "slow": PlaySpeed.constant(0.3, **w),
                 "ramp": PlaySpeed.ramp(0.2, 1.0, 0.6, **w), "shuttle": PlaySpeed.shuttle(1.0, 6.0, 0.3, 0.2, **w)}
        edits = (LtcEdit(**case["edit"]),) if case["edit"] else ()
        rate_hz = 192_000.0 if case["speed"] == "shuttle" else 48_000.0
        s = synthesize_ltc(LtcSpec(start=case["start"], rate_fps=case["rate_fps"], duration_s=1.2,
                                   speed=speed[case["speed"]], direction="reverse" if case["reverse"] else "forward",
                                   signal=case["signal"], edits=edits, playback=Playback(**play), rate_hz=rate_hz,
                                   seed=case["seed"]))
    else:
        if case["dropout"]:
            play["dropouts"] = ((0.3, 0.02, 30.0),)
        s = synthesize_kcs(KcsSpec(data=bytes.fromhex(case["data"]), baud=case["baud"], idle_bits=case["idle_bits"],
                                   speed=PlaySpeed.constant(case["speed_factor"], **case["wow"]),
                                   playback=Playback(**play), seed=case["seed"]))
    x = s.samples if s.samples.ndim == 2 else s.samples[:, None]
    return Capture(x, s.rate_hz, source=case["id"], units="FS")


def decode_tape(case: dict) -> dict:
    """One tape case as ``decode --json`` renders it (no ``--format``): reads and channel families."""
    from readchan.channel import decode_capture
    from readchan.report.render import read_dict, reads_of

    results = decode_capture(_tape_capture(case))
    return {"reads": [read_dict(r) for r in reads_of(results)], "families": [ch.family for ch in results]}


def decode_fixture(path: Path) -> dict:
    """``readchan decode PATH --json --unmask`` run in-process: its exit code and JSON."""
    from readchan.cli import main as cli

    argv, buf = sys.argv, io.StringIO()
    sys.argv = ["readchan", "decode", str(path), "--json", "--unmask"]
    code = None
    try:
        with redirect_stdout(buf):
            cli.main()
    except SystemExit as e:
        code = e.code
    finally:
        sys.argv = argv
    return {"exit": code, "json": json.loads(buf.getvalue())}


def fixtures() -> list[Path]:
    return sorted(p for p in FIXTURES.iterdir() if p.suffix.lower() in CAPTURE_SUFFIXES)


def record(n: int) -> dict:
    cases = synth_cases(n)
    return {
        "fixtures": {p.name: decode_fixture(p) for p in fixtures()},
        "cases": cases,
        "synth": {c["id"]: decode_synth(c) for c in cases},
    }


def differences(recorded, now, where: str = "") -> list[str]:
    """Where ``now`` departs from ``recorded``: a changed value or a key gone (added keys are allowed)."""
    if isinstance(recorded, dict):
        if not isinstance(now, dict):
            return [f"{where}: was an object, now {type(now).__name__}"]
        out = []
        for k, v in recorded.items():
            out += [f"{where}/{k}: key gone"] if k not in now else differences(v, now[k], f"{where}/{k}")
        return out
    if isinstance(recorded, list):
        if not isinstance(now, list) or len(now) != len(recorded):
            return [f"{where}: {len(recorded)} items recorded, now {len(now) if isinstance(now, list) else now!r}"]
        return [d for i, (a, b) in enumerate(zip(recorded, now)) for d in differences(a, b, f"{where}[{i}]")]
    if isinstance(recorded, float) and isinstance(now, (int, float)) and not isinstance(now, bool):
        # times and speeds are rounded to 6 decimals: a last-digit change across numeric libraries is no change
        same = abs(recorded - now) <= FLOAT_TOLERANCE * max(1.0, abs(recorded))
    else:
        same = recorded == now
    return [] if same else [f"{where}: recorded {recorded!r}, now {now!r}"]


def _portable(doc):
    """``doc`` with every ``source`` path cut to its file name: the fixtures were recorded in one
    checkout, and the comparison must hold in any other (a worktree, a fresh clone)."""
    if isinstance(doc, dict):
        return {k: (Path(v).name if k == "source" and isinstance(v, str) else _portable(v)) for k, v in doc.items()}
    if isinstance(doc, list):
        return [_portable(v) for v in doc]
    return doc


def check(golden: Path, tape: Path | None = None) -> list[str]:
    data = json.loads(golden.read_text())
    out = []
    if tape is not None:
        rec = json.loads(tape.read_text())
        for case in rec["cases"]:
            out += differences(rec["tape"][case["id"]], decode_tape(case), case["id"])
    for name, rec in data["fixtures"].items():
        out += differences(_portable(rec), _portable(decode_fixture(FIXTURES / name)), f"fixture {name}")
    for case in data["cases"]:
        out += differences(data["synth"][case["id"]], decode_synth(case), case["id"])
    return out


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    sub = ap.add_subparsers(dest="cmd", required=True)
    r = sub.add_parser("record")
    r.add_argument("--out", type=Path, default=GOLDEN)
    r.add_argument("--cases", type=int, default=220)
    t = sub.add_parser("record-tape")
    t.add_argument("--out", type=Path, default=TAPE_GOLDEN)
    t.add_argument("--cases", type=int, default=40)
    c = sub.add_parser("check")
    c.add_argument("--golden", type=Path, default=GOLDEN)
    c.add_argument("--tape", type=Path, default=TAPE_GOLDEN)
    a = ap.parse_args()
    if a.cmd == "record-tape":
        cases = tape_cases(a.cases)
        data = {"cases": cases, "tape": {c["id"]: decode_tape(c) for c in cases}}
        a.out.write_text(json.dumps(data, indent=1, sort_keys=True) + "\n")
        print(f"recorded {len(cases)} tape cases ({sum(len(v['reads']) for v in data['tape'].values())} reads) in {a.out}")
        return 0
    if a.cmd == "record":
        data = record(a.cases)
        a.out.parent.mkdir(parents=True, exist_ok=True)
        a.out.write_text(json.dumps(data, indent=1, sort_keys=True) + "\n")
        n_reads = sum(len(v) for v in data["synth"].values())
        print(f"recorded {len(data['fixtures'])} fixtures and {len(data['cases'])} synthesized cases "
              f"({n_reads} reads) in {a.out}")
        return 0
    diffs = check(a.golden, a.tape)
    for d in diffs[:50]:
        print(d)
    print(f"{len(diffs)} differences")
    return 1 if diffs else 0


if __name__ == "__main__":
    sys.exit(main())
