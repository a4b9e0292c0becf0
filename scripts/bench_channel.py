"""Card read channel cost per sample: warm ``decode_capture`` on 60 s captures against a plain read
of the file plus one 8th-order ``sosfilt`` pass, side by side in one run, with a stage breakdown.

Captures (invented card data, built by ``scripts/bench_stream.py``'s ``build``): ``bench``
(bench density, 0.25 s gaps, 56 % active) and ``continuous`` (back-to-back swipes), 48 kHz
16-bit WAV, ``--seconds`` long (default 60).

For each capture and each checkout (this one, and with ``--base DIR`` another, e.g. the start
commit, alternating run by run), one fresh worker process per repeat (``--repeat``, default 5;
medians printed) times:

* ``cold``: the first ``decode_capture(load_capture(p))`` in the process (imports done before;
  numba's on-disk cache load counts, compilation too when the cache is empty);
* ``warm``: the median of ``--warm`` (default 5) further decodes in that process, after
  three untimed ones (:data:`SETTLE`): the compiled kernels (:mod:`readchan._compiled`) switch
  on once enough work has gone through them, within the first few decodes of a 60 s capture,
  so the warm figure is the steady state a long streamed capture runs in;
* ``ref``: the reference, as ``bench_stream.py`` times it: the file read once untimed, then
  ``soundfile.read`` (float64) + one ``sosfilt`` of ``butter(8, 0.25)``, first call in the
  process; and ``ref_warm``: the median of 5 more such passes in the same process (the libraries
  and the allocator warm: a lower reference, so a higher ratio);
* the stage breakdown: one more decode with the main stages wrapped in ``perf_counter`` timers
  (nested stages are listed under their caller, with the number of calls).

Ratios are warm decode time over ``ref`` (and over ``ref_warm``).  Threads: ``OMP_NUM_THREADS=1``
(and the BLAS equivalents) unless set.  The load average (``/proc/loadavg``) is printed before
and after: the machine is shared.

Run: ``OMP_NUM_THREADS=1 python scripts/bench_channel.py [--seconds 60] [--repeat 5]
[--base /tmp/base] [--only bench]``.
"""

from __future__ import annotations

import argparse
import importlib
import json
import os
import statistics
import subprocess
import sys
import tempfile
import time
from collections import defaultdict
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
GAPS_S = {"bench": 0.25, "continuous": 0.0}
THREAD_VARS = ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS", "NUMBA_NUM_THREADS")

STAGES = (
    # (module the name is looked up in, name, label)
    ("readchan.channel", "repair_outliers", "repair_outliers"),
    ("readchan.formats.iso7811.card", "classify_kind", "classify_kind"),
    ("readchan.formats.iso7811.card", "only_white_noise", "only_white_noise"),
    ("readchan.formats.iso7811.card", "head_front_end", "head_front_end"),
    ("readchan.frontend.head", "condition", "  condition"),
    ("readchan.frontend.head", "signal_band_hz", "  signal_band_hz"),
    ("readchan.frontend.head", "refine", "  refine"),
    ("readchan.frontend.head", "quantisation_step", "  quantisation_step"),
    ("readchan.frontend.head", "detect_head", "  detect_head"),
    ("readchan.frontend.detect", "_lobe_peaks", "    _lobe_peaks"),
    ("readchan.frontend.head", "fit_hum", "  fit_hum"),
    ("readchan.frontend.head", "pulse_width_s", "  pulse_width_s"),
    ("readchan.frontend.head", "clipped_fraction", "  clipped_fraction"),
    ("readchan.formats.iso7811.card", "segment", "segment"),
    ("readchan.formats.iso7811.card", "clipped_fraction", "clipped_fraction (card)"),
    ("readchan.formats.iso7811.card", "reads_from", "reads_from"),
    ("readchan.formats.iso7811.card", "recover_bits", "  recover_bits"),
    ("readchan.formats.iso7811.card", "frame_auto", "  frame_auto"),
    ("readchan.formats.iso7811.card", "_checked", "  _checked"),
    ("readchan.formats.iso7811.card", "damage_evidence", "    damage_evidence"),
    ("readchan.formats.iso7811.card", "assign_tracks", "assign_tracks"),
    ("readchan.formats.iso7811.card", "condition", "condition (card: front end + PW50)"),
    ("readchan.formats.iso7811.card", "clocking_pw50_cell", "  clocking_pw50_cell"),
    ("readchan.formats.iso7811.card", "check_fields", "check_fields"),
    ("readchan.measure.status", "channel_status", "channel_status"),
)


# -- the worker (one fresh process per repeat) --------------------------------------------------

def _reference_pass(path: str) -> float:
    import soundfile as sf
    from scipy import signal as sps

    sos = sps.butter(8, 0.25, output="sos")
    t0 = time.perf_counter()
    x, _ = sf.read(path)
    sps.sosfilt(sos, x)
    return time.perf_counter() - t0


def _instrument(totals: dict, calls: dict) -> None:
    """Wrap each stage of :data:`STAGES` that exists in a timer adding to ``totals``/``calls``."""
    for mod_name, name, label in STAGES:
        try:
            mod = importlib.import_module(mod_name)
        except ImportError:
            continue
        fn = getattr(mod, name, None)
        if fn is None:
            continue

        def timed(*a, _fn=fn, _label=label, **k):
            t0 = time.perf_counter()
            try:
                return _fn(*a, **k)
            finally:
                totals[_label] += time.perf_counter() - t0
                calls[_label] += 1

        setattr(mod, name, timed)


SETTLE = 3
"""Untimed decodes between the cold one and the warm ones (see the module docstring)."""


def worker(path: str, warm_runs: int) -> dict:
    import soundfile as sf

    import readchan.formats.iso7811.card  # noqa: F401  (imports are not part of the decode)
    import readchan.measure.status  # noqa: F401
    from readchan.channel import decode_capture
    from readchan.io.capture import load_capture

    sf.read(path)                                 # the page cache and the library warm
    ref = _reference_pass(path)                   # first call in the process, as bench_stream.py
    t0 = time.perf_counter()
    res = decode_capture(load_capture(path))
    cold = time.perf_counter() - t0
    for _ in range(SETTLE):
        decode_capture(load_capture(path))
    warm, ref_warm = [], []
    for _ in range(warm_runs):
        ref_warm.append(_reference_pass(path))
        t0 = time.perf_counter()
        res = decode_capture(load_capture(path))
        warm.append(time.perf_counter() - t0)
    reads = [r for c in res for r in c.reads]
    totals: dict = defaultdict(float)
    calls: dict = defaultdict(int)
    _instrument(totals, calls)
    t0 = time.perf_counter()
    decode_capture(load_capture(path))
    staged = time.perf_counter() - t0
    return {"cold_s": cold, "warm_s": statistics.median(warm), "ref_s": ref, "ref_warm_s": statistics.median(ref_warm),
            "staged_s": staged, "stages": dict(totals), "calls": dict(calls), "reads": len(reads),
            "valid": sum(1 for r in reads if r.valid), "texts": sorted({r.frame.text for r in reads})[:3]}


def _run_worker(checkout: Path, path: Path, warm_runs: int, env: dict) -> dict:
    env = dict(env, PYTHONPATH=str(checkout) + os.pathsep + env.get("PYTHONPATH", ""))
    out = subprocess.run([sys.executable, __file__, "--worker", str(path), str(warm_runs)], cwd=checkout, env=env,
                         capture_output=True, text=True)
    if out.returncode != 0:
        raise SystemExit(f"worker failed ({checkout}) on {path.name}:\n{out.stderr.strip()[-2000:]}")
    return json.loads(out.stdout.strip().splitlines()[-1])


# -- the driver ---------------------------------------------------------------------------------

def _load() -> str:
    return " ".join(Path("/proc/loadavg").read_text().split()[:3])


def _summary(rows: list[dict], n: int) -> dict:
    med = lambda key: statistics.median(r[key] for r in rows)   # noqa: E731
    stages = {k: statistics.median(r["stages"].get(k, 0.0) for r in rows) for k in rows[0]["stages"]}
    return {"cold_s": med("cold_s"), "warm_s": med("warm_s"), "ref_s": med("ref_s"), "ref_warm_s": med("ref_warm_s"),
            "msps": n / med("warm_s") / 1e6, "ratio": med("warm_s") / med("ref_s"),
            "ratio_warm_ref": med("warm_s") / med("ref_warm_s"), "stages": stages, "calls": rows[0]["calls"],
            "staged_s": med("staged_s"), "reads": rows[0]["reads"], "valid": rows[0]["valid"],
            "warm_all": [round(r["warm_s"], 3) for r in rows]}


def report(name: str, label: str, s: dict) -> None:
    print(f"  {label}: warm {s['warm_s']:.3f} s ({s['msps']:.1f} M samples/s), cold {s['cold_s']:.3f} s; "
          f"ref {s['ref_s']:.3f} s (warm ref {s['ref_warm_s']:.3f} s); ratio {s['ratio']:.2f} "
          f"({s['ratio_warm_ref']:.2f} to the warm ref); {s['reads']} reads, {s['valid']} valid; warm runs {s['warm_all']}")


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--seconds", type=float, default=60.0, help="length of each capture, s (default 60)")
    ap.add_argument("--repeat", type=int, default=5, help="fresh worker processes per capture and checkout (default 5)")
    ap.add_argument("--warm", type=int, default=5, help="warm decodes per worker (median; default 5)")
    ap.add_argument("--base", type=Path, default=None, help="another checkout to run side by side (e.g. the start commit)")
    ap.add_argument("--only", default="", help="comma-separated captures (bench, continuous)")
    ap.add_argument("--json", type=Path, default=None, help="also write the figures to this JSON file")
    ap.add_argument("--worker", nargs=2, metavar=("PATH", "WARM"), help=argparse.SUPPRESS)
    args = ap.parse_args()
    if args.worker:
        print(json.dumps(worker(args.worker[0], int(args.worker[1]))))
        return
    if args.repeat < 1 or args.warm < 1 or args.seconds <= 0:
        raise SystemExit("--repeat and --warm must be at least 1 and --seconds positive")
    sys.path.insert(0, str(ROOT / "scripts"))
    import bench_stream

    env = dict(os.environ)
    for var in THREAD_VARS:
        env.setdefault(var, "1")
    checkouts = [("this", ROOT)] + ([("base", args.base.resolve())] if args.base else [])
    names = [n for n in GAPS_S if not args.only or n in args.only.split(",")]
    print(f"threads: OMP_NUM_THREADS={env['OMP_NUM_THREADS']}; load before: {_load()}")
    out = {}
    with tempfile.TemporaryDirectory() as tmp:
        for name in names:
            path = Path(tmp) / f"{name}.wav"
            n, swipes = bench_stream.build(path, GAPS_S[name], args.seconds)
            rows = defaultdict(list)
            for _ in range(args.repeat):                  # side by side: the checkouts alternate
                for label, checkout in checkouts:
                    rows[label].append(_run_worker(checkout, path, args.warm, env))
            print(f"{name}: {n:,} samples ({n / 48_000:.0f} s), {swipes} swipes; load {_load()}")
            sums = {label: _summary(rows[label], n) for label, _ in checkouts}
            for label, _ in checkouts:
                report(name, label, sums[label])
            if args.base:
                print(f"  warm speed-up this/base: {sums['base']['warm_s'] / sums['this']['warm_s']:.2f}x")
            print("  stages (s, median over workers; calls):" + (" this | base" if args.base else ""))
            labels = [lab for _, _, lab in STAGES]
            for lab in labels:
                vals = [sums[c]["stages"].get(lab) for c, _ in checkouts]
                if all(v is None for v in vals):
                    continue
                cells = " | ".join("      -" if v is None else f"{v:7.3f}" for v in vals)
                print(f"    {lab:<28} {cells}   ({sums['this']['calls'].get(lab, 0)} calls)")
            out[name] = sums
    print(f"load after: {_load()}")
    if args.json:
        args.json.write_text(json.dumps({"load": _load(), "captures": out}, indent=1))


if __name__ == "__main__":
    main()
