"""Specification of readchan.formats.iso7811.framing: encoding, framing both ways, LRC and correction."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from readchan.errors import FormatError, ParameterError
from readchan.formats.iso7811.charset import ISO_ALPHA, ISO_BCD, TRACKS, parse_format
from readchan.formats.iso7811.framing import encode_text, frame, frame_auto, lrc_code

SETTINGS = settings(max_examples=60, deadline=None)

ALPHA_DATA = "".join(chr(c) for c in range(0x20, 0x60) if chr(c) not in "%?")
BCD_DATA = "".join(chr(c) for c in range(0x30, 0x40) if chr(c) not in ";?")
DATA_CHARS = {"iso-alpha": ALPHA_DATA, "iso-bcd": BCD_DATA}


def padded(bits, lead, trail):
    """`bits` between `lead` and `trail` clocking zeros."""
    return np.concatenate([np.zeros(lead, np.uint8), bits, np.zeros(trail, np.uint8)])


@st.composite
def tracks(draw, numbers=(1, 2, 3)):
    """(track spec, text, leading zeros, trailing zeros), text up to the track's limit."""
    spec = TRACKS[draw(st.sampled_from(numbers))]
    longest = spec.max_chars - 3  # start and end sentinels and LRC
    text = draw(st.text(DATA_CHARS[spec.fmt.name], max_size=longest)
                | st.text(DATA_CHARS[spec.fmt.name], min_size=longest, max_size=longest))
    lead = draw(st.integers(0, spec.leading_zeros))
    trail = draw(st.integers(0, spec.trailing_zeros))
    return spec, text, lead, trail


def framed_text(spec, text):
    return spec.fmt.start_char + text + spec.fmt.end_char


# --------------------------------------------------------------------------- LRC and encoding


def test_lrc_of_a_short_track2_string_worked_by_hand():
    # ISO/IEC 7811-2: LRC = XOR of the data bits, start through end sentinel, column by column
    #             b0 b1 b2 b3
    #   ';' 0Bh    1  1  0  1
    #   '1' 01h    1  0  0  0
    #   '2' 02h    0  1  0  0
    #   '=' 0Dh    1  0  1  1
    #   '?' 0Fh    1  1  1  1
    #   ones       4  3  2  3   -> even, odd, even, odd
    #   LRC        0  1  0  1   = 0Ah (':'); two ones, so its odd parity bit is 1
    codes = [ISO_BCD.code_of(c) for c in ";12=?"]
    assert lrc_code(codes, ISO_BCD) == 0x0A
    bits = encode_text(";12=?", ISO_BCD).reshape(-1, 5)
    assert bits[-1].tolist() == [0, 1, 0, 1, 1]


def test_encoded_track2_string_bit_by_bit():
    # ISO/IEC 7811-2: each character LSB first then odd parity, LRC last
    expected = [
        [1, 1, 0, 1, 0],  # ';' 0Bh, three ones -> parity 0
        [1, 0, 0, 0, 0],  # '1' 01h, one one -> parity 0
        [0, 1, 0, 0, 0],  # '2' 02h, one one -> parity 0
        [1, 0, 1, 1, 0],  # '=' 0Dh, three ones -> parity 0
        [1, 1, 1, 1, 1],  # '?' 0Fh, four ones -> parity 1
        [0, 1, 0, 1, 1],  # LRC 0Ah (worked out above)
    ]
    bits = encode_text(";12=?", ISO_BCD)
    assert bits.dtype == np.uint8
    assert bits.reshape(-1, 5).tolist() == expected


def test_lrc_of_the_sentinels_alone():
    # ISO/IEC 7811-2: '%' 05h XOR '?' 1Fh = 1Ah; three ones, odd parity bit 0
    bits = encode_text("", ISO_ALPHA).reshape(-1, 7)
    assert bits.tolist() == [
        [1, 0, 1, 0, 0, 0, 1],
        [1, 1, 1, 1, 1, 0, 0],
        [0, 1, 0, 1, 1, 0, 0],
    ]


def test_encoding_adds_sentinels_only_where_missing():
    assert np.array_equal(encode_text("12=", ISO_BCD), encode_text(";12=?", ISO_BCD))
    assert np.array_equal(encode_text(";12=", ISO_BCD), encode_text("12=?", ISO_BCD))


def test_encoding_refuses_a_start_sentinel_inside_the_data():
    with pytest.raises(FormatError):
        encode_text("12;34", ISO_BCD)


def test_encoding_refuses_an_end_sentinel_inside_the_data():
    with pytest.raises(FormatError):
        encode_text("%B12?34", ISO_ALPHA)


def test_encoding_refuses_characters_outside_the_set():
    # ISO/IEC 7811-2: no letters on tracks 2/3
    with pytest.raises(FormatError):
        encode_text("12A4", ISO_BCD)


def test_track2_holds_at_most_40_characters():
    # ISO/IEC 7813 (from memory of the standard): 40 characters incl. sentinels and LRC
    assert encode_text("1" * 37, ISO_BCD, max_chars=TRACKS[2].max_chars).size == 40 * 5
    with pytest.raises(FormatError):
        encode_text("1" * 38, ISO_BCD, max_chars=TRACKS[2].max_chars)


def test_track1_holds_at_most_79_characters():
    # ISO/IEC 7811-2 (from memory of the standard): 79 characters incl. sentinels and LRC
    assert encode_text("A" * 76, ISO_ALPHA).size == 79 * 7
    with pytest.raises(FormatError):
        encode_text("A" * 77, ISO_ALPHA)


def test_track3_holds_at_most_107_characters():
    # ISO 4909 (from memory of the standard): 107 characters incl. sentinels and LRC
    assert encode_text("1" * 104, ISO_BCD).size == 107 * 5
    with pytest.raises(FormatError):
        encode_text("1" * 105, ISO_BCD)


def test_format_without_lrc_ends_at_the_end_sentinel():
    fmt = parse_format("custom:bits=5,parity=even,start=0x0B,end=0x0F,lrc=off")
    bits = encode_text("12", fmt).reshape(-1, 6)
    assert bits.shape == (4, 6)
    assert bits[-1].tolist() == fmt.char_bits(0x0F).tolist()


# --------------------------------------------------------------------------- round trips


@SETTINGS
@given(tracks())
def test_encoded_text_frames_back_forward(case):
    spec, text, lead, trail = case
    bits = padded(encode_text(text, spec.fmt, max_chars=spec.max_chars), lead, trail)
    found = frame(bits, spec.fmt, max_chars=spec.max_chars)
    assert found.valid
    assert found.direction == "forward"
    assert found.text == framed_text(spec, text)
    assert found.corrected == () and found.revised_bits == ()


@SETTINGS
@given(tracks())
def test_encoded_text_frames_back_from_a_reversed_swipe(case):
    spec, text, lead, trail = case
    bits = padded(encode_text(text, spec.fmt, max_chars=spec.max_chars), lead, trail)
    found = frame(bits[::-1], spec.fmt, max_chars=spec.max_chars)
    assert found.valid
    assert found.direction == "reverse"
    assert found.text == framed_text(spec, text)


@SETTINGS
@given(tracks())
def test_bit_index_points_at_every_framed_bit(case):
    spec, text, lead, trail = case
    fmt = spec.fmt
    bits = padded(encode_text(text, fmt, max_chars=spec.max_chars), lead, trail)
    for given_bits in (bits, bits[::-1].copy()):
        found = frame(given_bits, fmt, max_chars=spec.max_chars)
        assert found.bit_index.shape == (len(found.text) + 1, fmt.bits_per_char)
        rows = given_bits[found.bit_index]
        for row, code in zip(rows, [*found.codes, found.lrc]):
            assert row.tolist() == fmt.char_bits(code).tolist()


def test_reverse_read_indices_decrease():
    bits = padded(encode_text(";12=?", ISO_BCD), 10, 10)[::-1]
    found = frame(bits, ISO_BCD)
    assert found.direction == "reverse"
    assert np.all(np.diff(found.bit_index.ravel()) == -1)
    assert found.bit_index[0, 0] == bits.size - 1 - 10


def test_frame_codes_and_lrc_as_read():
    found = frame(padded(encode_text(";12=?", ISO_BCD), 22, 15), ISO_BCD)
    assert found.codes.tolist() == [0x0B, 0x01, 0x02, 0x0D, 0x0F]
    assert found.lrc == 0x0A  # worked out by hand above
    assert found.parity_ok.tolist() == [True] * 6
    assert found.lrc_ok and found.complete


def test_frame_auto_chooses_the_format_that_reads_validly():
    alpha = padded(encode_text("%B1234^QUILL/ODESSA M^2912?", ISO_ALPHA), 61, 30)
    bcd = padded(encode_text(";1234=2912?", ISO_BCD), 22, 15)
    assert frame_auto(alpha).format == "iso-alpha"
    assert frame_auto(bcd).format == "iso-bcd"
    assert frame_auto(bcd[::-1]).text == ";1234=2912?"


def test_no_start_sentinel_means_no_frame():
    assert frame(np.zeros(200, np.uint8), ISO_BCD) is None
    assert frame_auto(np.zeros(200, np.uint8)) is None
    assert frame(np.zeros(0, np.uint8), ISO_ALPHA) is None


def test_custom_five_bit_even_parity_format_without_lrc_round_trips():
    fmt = parse_format("custom:bits=5,parity=even,start=0x0B,end=0x0F,lrc=off")
    text = "0123456789:<=>@ABCDE"  # 0x30..0x45 less the sentinels ';' and '?'
    found = frame(padded(encode_text(text, fmt), 20, 20)[::-1], fmt)
    assert found.valid and found.lrc is None and found.lrc_ok
    assert found.text == ";" + text + "?"
    assert found.bit_index.shape == (len(text) + 2, 6)


def test_frames_are_immutable():
    found = frame(padded(encode_text(";12=?", ISO_BCD), 5, 5), ISO_BCD)
    with pytest.raises(ValueError):
        found.codes[0] = 0
    with pytest.raises(AttributeError):
        found.valid = False  # type: ignore[misc]


# --------------------------------------------------------------------------- damaged reads


@SETTINGS
@given(tracks(), st.data())
def test_a_single_flipped_data_bit_anywhere_is_corrected_and_reported(case, data):
    # ISO/IEC 7811-2 parity per character and LRC per column locate a single flipped bit
    spec, text, lead, trail = case
    fmt = spec.fmt
    clean = encode_text(text, fmt, max_chars=spec.max_chars)
    n_chars = clean.size // fmt.bits_per_char
    char = data.draw(st.integers(0, n_chars - 2), label="character")   # the LRC: see below
    bit = data.draw(st.integers(0, fmt.data_bits - 1), label="data bit")
    where = lead + char * fmt.bits_per_char + bit
    bits = padded(clean, lead, trail)
    bits[where] ^= 1
    reverse = data.draw(st.booleans(), label="reverse")
    given_bits = bits[::-1] if reverse else bits
    found = frame(given_bits, fmt, max_chars=spec.max_chars)
    assert found.valid
    assert found.text == framed_text(spec, text)
    assert found.corrected == (char,)
    (revised,) = found.revised_bits
    repaired = given_bits.copy()
    repaired[revised] ^= 1
    reread = frame(repaired, fmt, max_chars=spec.max_chars)
    assert reread.valid and reread.corrected == () and reread.text == found.text
    if len(text) >= 3:  # a shorter track can hold two equally good single-error readings
        assert revised == ((bits.size - 1 - where) if reverse else where)
    assert found.parity_ok.tolist().count(False) == 1
    assert not found.parity_ok[char]


def test_a_flipped_lrc_data_bit_is_not_corrected_and_leaves_the_read_invalid():
    # A bad LRC data bit is indistinguishable from a parity-preserving burst in a data
    # character plus a bad LRC bit; "correcting" it would vouch for data the LRC no longer
    # protects, so the read stays invalid (our policy; the data characters are still shown).
    clean = encode_text(";1234=2912?", ISO_BCD)
    bits = padded(clean, 22, 15)
    bits[22 + clean.size - 5] ^= 1          # first data bit of the LRC character
    found = frame(bits, ISO_BCD)
    assert found.text == ";1234=2912?"
    assert not found.valid and found.corrected == ()
    assert not found.lrc_ok


def test_a_flipped_parity_bit_is_corrected_leaving_the_data():
    clean = encode_text(";1234=2912?", ISO_BCD)
    bits = padded(clean, 22, 15)
    where = 22 + 3 * 5 + 4  # parity bit of '3'
    bits[where] ^= 1
    found = frame(bits, ISO_BCD)
    assert found.valid
    assert found.text == ";1234=2912?"
    assert found.corrected == (3,)
    assert found.revised_bits == (where,)
    assert found.codes[3] == 3


def test_a_flipped_parity_bit_of_the_lrc_character_is_reported_at_index_len_text():
    text = ";1234=2912?"
    bits = padded(encode_text(text, ISO_BCD), 22, 15)
    where = 22 + len(text) * 5 + 4          # the LRC's own parity bit
    bits[where] ^= 1
    found = frame(bits, ISO_BCD)
    assert found.valid and found.text == text
    assert found.corrected == (len(text),)
    assert found.revised_bits == (where,)


def test_a_damaged_start_sentinel_is_corrected():
    bits = padded(encode_text("%B1234^QUILL/ODESSA M^2912?", ISO_ALPHA), 61, 30)
    bits[61 + 2] ^= 1  # '%' 05h -> 01h
    found = frame(bits, ISO_ALPHA)
    assert found.valid and found.text.startswith("%B1234")
    assert found.corrected == (0,)


def test_a_damaged_end_sentinel_is_corrected():
    text = ";1234=2912?"
    bits = padded(encode_text(text, ISO_BCD), 22, 15)
    bits[22 + (len(text) - 1) * 5 + 3] ^= 1  # '?' 0Fh -> 07h
    found = frame(bits, ISO_BCD)
    assert found.valid and found.text == text
    assert found.corrected == (len(text) - 1,)


@SETTINGS
@given(tracks(), st.data())
def test_two_flipped_bits_in_different_characters_are_never_valid(case, data):
    spec, text, lead, trail = case
    fmt = spec.fmt
    clean = encode_text(text, fmt, max_chars=spec.max_chars)
    n_chars = clean.size // fmt.bits_per_char
    first, second = data.draw(
        st.lists(st.integers(0, n_chars - 1), min_size=2, max_size=2, unique=True),
        label="characters")
    bits = padded(clean, lead, trail)
    for char in (first, second):
        bit = data.draw(st.integers(0, fmt.bits_per_char - 1), label="bit")
        bits[lead + char * fmt.bits_per_char + bit] ^= 1
    reverse = data.draw(st.booleans(), label="reverse")
    found = frame(bits[::-1] if reverse else bits, fmt, max_chars=spec.max_chars)
    assert found is None or not found.valid


def test_two_parity_failures_are_never_corrected_and_the_text_is_still_shown():
    text = ";1234=2912?"
    bits = padded(encode_text(text, ISO_BCD), 22, 15)
    bits[22 + 2 * 5 + 0] ^= 1  # '2' -> '3'
    bits[22 + 7 * 5 + 1] ^= 1  # '9' 09h -> 0Bh
    found = frame(bits, ISO_BCD)
    assert not found.valid
    assert found.corrected == () and found.revised_bits == ()
    assert found.parity_ok.tolist().count(False) == 2
    assert found.text.startswith(";13")


def test_without_lrc_a_flipped_bit_is_detected_but_not_corrected():
    fmt = parse_format("custom:bits=5,parity=even,start=0x0B,end=0x0F,lrc=off")
    bits = padded(encode_text("123", fmt), 10, 10)
    bits[10 + 6 + 1] ^= 1
    found = frame(bits, fmt)
    assert not found.valid
    assert found.corrected == ()
    assert not found.parity_ok[1]


def test_a_read_cut_short_is_incomplete_with_its_partial_text():
    bits = padded(encode_text(";1234=2912?", ISO_BCD), 22, 0)[: 22 + 6 * 5]
    found = frame(bits, ISO_BCD)
    assert not found.complete and not found.valid
    assert found.lrc is None and not found.lrc_ok
    assert found.text == ";1234="


def test_max_chars_stops_the_read():
    bits = padded(encode_text(";1234=2912?", ISO_BCD), 22, 15)
    found = frame(bits, ISO_BCD, max_chars=5)
    assert not found.complete
    assert found.n_chars <= 5


def test_bits_must_be_a_one_dimensional_array_of_zeros_and_ones():
    with pytest.raises(ParameterError):
        frame(np.array([0, 1, 2]), ISO_BCD)
    with pytest.raises(ParameterError):
        frame(np.zeros((2, 10), np.uint8), ISO_BCD)
    with pytest.raises(ParameterError):
        frame(np.zeros(10), ISO_BCD, max_chars=2)


def test_boolean_bits_are_accepted():
    bits = padded(encode_text(";12=?", ISO_BCD), 3, 3).astype(bool)
    assert frame(bits, ISO_BCD).text == ";12=?"
