"""The LTC frame word and the drop-frame label rule, against the standard and a reference library.

Sources: SMPTE ST 12-1 / IEC 60461 bit assignments and drop-frame rule (../shared/REFERENCE.md);
the registry package ``timecode`` (a general-purpose frame-arithmetic library) as an outside
implementation of drop-frame labels.
"""

from __future__ import annotations

import numpy as np
import pytest
from timecode import Timecode

from readchan.errors import FormatError
from readchan.formats.ltc.word import (SYNC_REVERSED, SYNC_WORD, FrameWord, Label, bcd_valid, count_to_label,
                                    decode_word, encode_word, frames_per_day, label_to_count, zeros_even)

# 01:23:45:13 at 25 fps, no flags, user bits 0, worked by hand from the bit table of SMPTE ST 12-1
# (REFERENCE.md; the 25 fps positions of BGF0 = 27, BGF2 = 43, polarity = 59):
#   bits 0–3 frame units 3 → 1100     4–7 user 1      → 0000
#   bits 8–9 frame tens 1 → 10, 10 drop frame 0, 11 colour frame 0, 12–15 user 2 → 0000
#   16–19 seconds units 5 → 1010      20–23 user 3    → 0000
#   24–26 seconds tens 4 → 001, 27 BGF0 0            28–31 user 4 → 0000
#   32–35 minutes units 3 → 1100      36–39 user 5    → 0000
#   40–42 minutes tens 2 → 010, 43 BGF2 0            44–47 user 6 → 0000
#   48–51 hours units 1 → 1000        52–55 user 7    → 0000
#   56–57 hours tens 0 → 00, 58 BGF1 0, 59 polarity ?, 60–63 user 8 → 0000
#   64–79 sync 0011 1111 1111 1101
# Ones before the sync word: 2 + 1 + 2 + 1 + 2 + 1 + 1 = 10; the sync word has 13; 23 ones
# leave 57 zeros, odd, so the polarity-correction bit is 1 (making 56 zeros).
HAND_WORD_25 = ("1100" "0000" "10" "0" "0" "0000" "1010" "0000" "001" "0" "0000" "1100" "0000"
                "010" "0" "0000" "1000" "0000" "00" "0" "1" "0000" "0011111111111101")


def _bits(text: str) -> np.ndarray:
    return np.array([int(c) for c in text], np.uint8)


def test_frame_word_matches_the_hand_worked_word_at_25_fps():
    word = FrameWord(Label(1, 23, 45, 13))
    assert "".join(map(str, encode_word(word, 25.0))) == HAND_WORD_25


def test_polarity_bit_moves_to_bit_27_in_the_30_frame_family():
    # SMPTE ST 12-1: polarity correction at bit 27 for 30/29.97/24 fps, bit 59 for 25 fps
    expected = _bits(HAND_WORD_25)
    expected[59], expected[27] = 0, 1
    assert np.array_equal(encode_word(FrameWord(Label(1, 23, 45, 13)), 30.0), expected)


def test_hand_worked_word_decodes_to_its_label():
    w = decode_word(_bits(HAND_WORD_25), 25.0)
    assert (w.label, w.polarity, w.drop_frame, w.color_frame) == (Label(1, 23, 45, 13), 1, False, False)


def test_every_encoded_word_has_an_even_number_of_zeros():
    rng = np.random.default_rng(3)
    for _ in range(200):
        lab = Label(*(int(v) for v in (rng.integers(24), rng.integers(60), rng.integers(60), rng.integers(30))))
        word = FrameWord(lab, bool(rng.integers(2)), bool(rng.integers(2)), int(rng.integers(1 << 32)),
                         tuple(int(b) for b in rng.integers(0, 2, 3)))
        for rate in (25.0, 30.0):
            assert zeros_even(encode_word(word, rate))


def test_flipping_one_bit_breaks_the_polarity_check():
    bits = encode_word(FrameWord(Label(10, 0, 0, 0), user_bits=0x12345678), 25.0)
    bits[5] ^= 1
    assert not zeros_even(bits)


def test_user_bit_groups_are_read_group_one_first_least_significant_bit_first():
    bits = encode_word(FrameWord(Label(0, 0, 0, 0), user_bits=0x87654321), 30.0)
    # group 1 = bits 4–7 holds the nibble 1: its first recorded bit (bit 4) is the LSB
    assert list(bits[4:8]) == [1, 0, 0, 0]
    assert list(bits[60:64]) == [0, 0, 0, 1]               # group 8 holds 8
    assert decode_word(bits).user_hex == "12345678"


def test_sync_word_read_backwards_is_the_reverse_pattern():
    # REFERENCE.md: read backwards 1011 1111 1111 1100
    assert "".join(map(str, SYNC_REVERSED)) == "1011111111111100"
    assert "".join(map(str, SYNC_WORD)) == "0011111111111101"


def test_binary_group_flags_sit_at_the_rate_dependent_positions():
    w = FrameWord(Label(0, 0, 0, 0), bgf=(1, 0, 0))
    assert encode_word(w, 25.0)[27] == 1 and encode_word(w, 30.0)[43] == 1
    w2 = FrameWord(Label(0, 0, 0, 0), bgf=(0, 0, 1))
    assert encode_word(w2, 25.0)[43] == 1 and encode_word(w2, 30.0)[59] == 1
    assert decode_word(encode_word(w2, 25.0), 25.0).bgf == (0, 0, 1)


def test_bcd_digit_out_of_range_is_refused():
    bits = encode_word(FrameWord(Label(0, 0, 0, 0)), 25.0)
    bits[0:4] = [0, 1, 0, 1]                                # frame units 10
    assert not bcd_valid(bits)
    with pytest.raises(FormatError):
        decode_word(bits)


@pytest.mark.parametrize("start", [0, 107_892 - 40, 17_982 * 3 - 40, 1_798 + 1_800 - 40,
                                   144 * 17_982 - 40])
def test_drop_frame_labels_agree_with_the_timecode_package(start):
    # windows across a whole hour, ten-minute boundaries, an ordinary minute and the 24-hour wrap;
    # the package counts frames from 1
    for count in range(start, start + 80):
        ours = count_to_label(count, 30, True).text(True)
        ref = str(Timecode("29.97", frames=count % frames_per_day(30, True) + 1))
        assert ours == ref


def test_drop_frame_counts_agree_with_the_timecode_package():
    for text in ("00:00:59;29", "00:01:00;02", "00:09:59;29", "00:10:00;00", "00:10:00;01",
                 "01:00:00;00", "12:34:56;18", "23:59:59;29"):
        assert label_to_count(Label.parse(text)[0], 30, True) == Timecode("29.97", text).frames - 1


def test_an_hour_of_drop_frame_skips_exactly_frames_00_and_01_outside_tens_of_minutes():
    # SMPTE ST 12-1: 00 and 01 skipped each minute except 00, 10, 20, 30, 40, 50
    seen = {count_to_label(c, 30, True) for c in range(5 * 107_892, 6 * 107_892)}
    assert len(seen) == 107_892 == 108_000 - 54 * 2
    skipped = {Label(5, m, 0, f) for m in range(60) if m % 10 for f in (0, 1)}
    assert not seen & skipped
    assert Label(5, 10, 0, 0) in seen and Label(5, 11, 0, 2) in seen


def test_drop_frame_day_wraps_to_midnight():
    last = label_to_count(Label(23, 59, 59, 29), 30, True)
    assert last == frames_per_day(30, True) - 1
    assert count_to_label(last + 1, 30, True) == Label(0, 0, 0, 0)


def test_skipped_drop_frame_label_is_refused():
    with pytest.raises(FormatError):
        label_to_count(Label(0, 1, 0, 0), 30, True)


@pytest.mark.parametrize("per_second", [24, 25, 30])
def test_non_drop_labels_round_trip_and_count_at_the_rate(per_second):
    lab = Label(13, 7, 42, per_second - 1)
    c = label_to_count(lab, per_second)
    assert c == ((13 * 60 + 7) * 60 + 42) * per_second + per_second - 1
    assert count_to_label(c, per_second) == lab
    assert count_to_label(c + 1, per_second) == Label(13, 7, 43, 0)
