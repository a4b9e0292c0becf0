"""False-accept chance of the parity-guided recovery search, by Monte Carlo at the bit level.

For each ISO track format (at its maximum length, the worst case: most rectangles), a random
valid track is encoded, a failing read is made by flipping w bits of the frame (w = 2..4, or
a burst of two adjacent bits in one character, which keeps that character's parity), every
framed bit gets a decision margin, and the recovery search of readchan.formats.iso7811.recover is run.
Counted: reads recovered to the true text, reads left invalid, and false accepts (a valid
reading whose text is wrong).

Two margin models:
* ``timing``: wrong bits are the least confident ones (margin uniform in 0..0.3, correct bits
  in 0.2..1.0), as when timing errors cause them;
* ``blind``: wrong bits look like any other (all margins uniform in 0..1): the search set is
  then a random draw, the hostile case for the uniqueness argument.

Run: python scripts/analyse_recovery.py [--trials 20000] [--seed 1] [--patterns 2,3,burst,char3,1+2] [--tracks 1,2,3]
"""

from __future__ import annotations

import argparse

import numpy as np

from readchan.formats.iso7811.charset import TRACKS
from readchan.formats.iso7811.framing import encode_text, frame
from readchan.formats.iso7811.recover import CORRECTION_RANK, MAX_FLIPS, candidate_count, confirm_correction, recover


def random_text(track: int, rng: np.random.Generator) -> str:
    spec = TRACKS[track]
    fmt = spec.fmt
    alphabet = [chr(c + fmt.offset) for c in range(2 ** fmt.data_bits) if c not in (fmt.start_code, fmt.end_code)]
    n = spec.max_chars - 3
    return fmt.start_char + "".join(rng.choice(alphabet, n)) + fmt.end_char


def one_trial(track: int, pattern: str, model: str, rng: np.random.Generator) -> str:
    spec = TRACKS[track]
    fmt = spec.fmt
    text = random_text(track, rng)
    payload = encode_text(text, fmt, spec.max_chars)
    lead, trail = spec.leading_zeros, spec.trailing_zeros
    bits = np.concatenate((np.zeros(lead, np.uint8), payload, np.zeros(trail, np.uint8)))
    framed = np.arange(lead + fmt.bits_per_char, lead + payload.size - 2 * fmt.bits_per_char)  # spare the sentinels
    n_chars = payload.size // fmt.bits_per_char
    width = fmt.bits_per_char
    if pattern == "burst":                      # two adjacent bits of one character
        c = rng.integers(1, n_chars - 2)
        j = rng.integers(0, width - 1)
        wrong = lead + c * width + np.array([j, j + 1])
    elif pattern == "char3":                    # three bits of one character
        c = rng.integers(1, n_chars - 2)
        wrong = lead + c * width + rng.choice(width, 3, replace=False)
    elif pattern == "1+2":                      # one bit in a character, two in another
        a, b = rng.choice(np.arange(1, n_chars - 2), 2, replace=False)
        wrong = np.concatenate((lead + a * width + rng.choice(width, 1),
                                lead + b * width + rng.choice(width, 2, replace=False)))
    else:
        wrong = rng.choice(framed, int(pattern), replace=False)
    bits[wrong] ^= 1
    margin = rng.uniform(0.2, 1.0, bits.size) if model == "timing" else rng.uniform(0.0, 1.0, bits.size)
    if model == "timing":
        margin[wrong] = rng.uniform(0.0, 0.3, wrong.size)
    base = frame(bits, fmt, max_chars=spec.max_chars)
    if base is None:
        return "lost"
    base = confirm_correction(base, bits, margin, fmt)
    if base.valid:
        return "wrong-correction" if base.text != text else "right"
    rec = recover(bits, margin, base, fmt)
    if rec.frame is None:
        return "invalid"
    return "recovered" if rec.frame.text == text else "wrong-recovery"


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--trials", type=int, default=20000)
    ap.add_argument("--seed", type=int, default=1)
    ap.add_argument("--patterns", default="1,2,3,burst,char3,1+2", help="error patterns, comma separated")
    ap.add_argument("--tracks", default="1,2,3")
    args = ap.parse_args()
    rng = np.random.default_rng(args.seed)
    print(f"correction kept only on one of the {CORRECTION_RANK} least confident bits; search: up to {MAX_FLIPS} "
          f"of the k + 1 least confident bits ({candidate_count()} candidates at most); accepted only when unique")
    print("errors: n random bits of the data (1: a single error, for the correction); burst: 2 adjacent bits of one character; char3: 3 bits of")
    print("one character; 1+2: one bit in a character and two in another.  FA = false accepts (valid,")
    print("wrong text), by the single-character correction of the framing or by the recovery search;")
    print("'upper' is a 95 % upper bound on the recovery's false-accept rate (3/n when none is seen).")
    print(f"{'track':>5} {'errors':>6} {'model':>7} {'trials':>7} {'corrected':>9} {'recovered':>9} {'invalid':>8}"
          f" {'FA corr.':>8} {'FA recov.':>9} {'upper':>8}")
    for track in (int(t) for t in args.tracks.split(",")):
        for pattern in args.patterns.split(","):
            for model in ("timing", "blind"):
                counts = dict.fromkeys(("right", "recovered", "invalid", "lost", "wrong-correction", "wrong-recovery"), 0)
                for _ in range(args.trials):
                    counts[one_trial(track, pattern, model, rng)] += 1
                n = args.trials
                w = counts["wrong-recovery"]
                upper = (3.0 if w == 0 else w + 2 * w ** 0.5) / n
                print(f"{track:>5} {pattern:>6} {model:>7} {n:>7} {counts['right'] / n:>9.2%} {counts['recovered'] / n:>9.2%} "
                      f"{(counts['invalid'] + counts['lost']) / n:>8.2%} {counts['wrong-correction']:>8} {w:>9} {upper:>8.1e}",
                      flush=True)


if __name__ == "__main__":
    main()
