"""Specification of readchan.formats.iso7811.charset: ISO character sets, track layouts, user formats."""

from __future__ import annotations

import dataclasses

import numpy as np
import pytest

from readchan.errors import FormatError
from readchan.formats.iso7811.charset import (
    ISO_ALPHA,
    ISO_BCD,
    KNOWN_FORMATS,
    TRACKS,
    CharFormat,
    parity_bit,
    parse_format,
)

# --------------------------------------------------------------------------- character sets


def test_iso_alpha_code_is_ascii_minus_0x20_over_0x20_to_0x5f():
    # ISO/IEC 7811-2: track 1 code = ASCII - 0x20 over 0x20..0x5F
    for ascii_value in range(0x20, 0x60):
        ch = chr(ascii_value)
        assert ISO_ALPHA.code_of(ch) == ascii_value - 0x20
        assert ISO_ALPHA.char_of(ascii_value - 0x20) == ch


def test_iso_bcd_code_is_ascii_minus_0x30_over_0x30_to_0x3f():
    # ISO/IEC 7811-2: tracks 2/3 code = ASCII - 0x30 over 0x30..0x3F
    for ascii_value in range(0x30, 0x40):
        ch = chr(ascii_value)
        assert ISO_BCD.code_of(ch) == ascii_value - 0x30
        assert ISO_BCD.char_of(ascii_value - 0x30) == ch


def test_characters_outside_the_iso_alpha_set_are_refused():
    # ISO/IEC 7811-2: track 1 has no lower case (0x60 and above) and nothing below 0x20
    for ch in ("a", "~", "\n", "é"):
        with pytest.raises(FormatError):
            ISO_ALPHA.code_of(ch)


def test_characters_outside_the_iso_bcd_set_are_refused():
    # ISO/IEC 7811-2: tracks 2/3 hold only 0x30..0x3F ('0'..'9', ':', ';', '<', '=', '>', '?')
    for ch in ("A", "/", "@", " "):
        with pytest.raises(FormatError):
            ISO_BCD.code_of(ch)


def test_iso_alpha_sentinel_codes():
    # ISO/IEC 7811-2: track 1 start '%' (05h), separator '^' (3Eh), end '?' (1Fh)
    assert ISO_ALPHA.code_of("%") == ISO_ALPHA.start_code == 0x05
    assert ISO_ALPHA.code_of("^") == ISO_ALPHA.separator_code == 0x3E
    assert ISO_ALPHA.code_of("?") == ISO_ALPHA.end_code == 0x1F


def test_iso_bcd_sentinel_codes():
    # ISO/IEC 7811-2: tracks 2/3 start ';' (0Bh), separator '=' (0Dh), end '?' (0Fh)
    assert ISO_BCD.code_of(";") == ISO_BCD.start_code == 0x0B
    assert ISO_BCD.code_of("=") == ISO_BCD.separator_code == 0x0D
    assert ISO_BCD.code_of("?") == ISO_BCD.end_code == 0x0F


def test_percent_start_sentinel_bits_are_lsb_first_then_odd_parity():
    # ISO/IEC 7811-2: 6 data bits LSB first, parity last; 0x05 = 000101b -> 1,0,1,0,0,0;
    # two ones, so the odd parity bit is 1
    assert ISO_ALPHA.char_bits(ISO_ALPHA.code_of("%")).tolist() == [1, 0, 1, 0, 0, 0, 1]


def test_alpha_end_sentinel_bits():
    # ISO/IEC 7811-2: '?' = 0x1F = 011111b -> 1,1,1,1,1,0; five ones, parity 0
    assert ISO_ALPHA.char_bits(0x1F).tolist() == [1, 1, 1, 1, 1, 0, 0]


def test_alpha_separator_bits():
    # ISO/IEC 7811-2: '^' = 0x3E = 111110b -> 0,1,1,1,1,1; five ones, parity 0
    assert ISO_ALPHA.char_bits(0x3E).tolist() == [0, 1, 1, 1, 1, 1, 0]


def test_semicolon_start_sentinel_bits_are_lsb_first_then_odd_parity():
    # ISO/IEC 7811-2: 4 data bits LSB first, parity last; 0x0B = 1011b -> 1,1,0,1;
    # three ones, so the odd parity bit is 0
    assert ISO_BCD.char_bits(ISO_BCD.code_of(";")).tolist() == [1, 1, 0, 1, 0]


def test_bcd_end_sentinel_bits():
    # ISO/IEC 7811-2: '?' = 0x0F = 1111b -> 1,1,1,1; four ones, parity 1
    assert ISO_BCD.char_bits(0x0F).tolist() == [1, 1, 1, 1, 1]


def test_bcd_separator_bits():
    # ISO/IEC 7811-2: '=' = 0x0D = 1101b -> 1,0,1,1; three ones, parity 0
    assert ISO_BCD.char_bits(0x0D).tolist() == [1, 0, 1, 1, 0]


@pytest.mark.parametrize("fmt", KNOWN_FORMATS, ids=lambda f: f.name)
def test_every_iso_character_holds_an_odd_number_of_ones(fmt):
    # ISO/IEC 7811-2: odd parity over data and parity bit
    for code in range(fmt.n_codes):
        bits = fmt.char_bits(code)
        assert bits.dtype == np.uint8
        assert int(bits.sum()) % 2 == 1


@pytest.mark.parametrize("fmt", KNOWN_FORMATS, ids=lambda f: f.name)
def test_char_bits_data_part_reassembles_the_code(fmt):
    # ISO/IEC 7811-2: least significant bit first
    for code in range(fmt.n_codes):
        data = fmt.char_bits(code)[: fmt.data_bits]
        assert int(sum(int(b) << i for i, b in enumerate(data))) == code


def test_bits_per_character_is_data_plus_parity():
    # ISO/IEC 7811-2: 6 + 1 on track 1, 4 + 1 on tracks 2/3
    assert ISO_ALPHA.bits_per_char == 7
    assert ISO_BCD.bits_per_char == 5


def test_format_without_parity_has_only_data_bits():
    fmt = parse_format("custom:bits=6,parity=none,start=5,end=31")
    assert fmt.bits_per_char == 6
    assert fmt.char_bits(5).tolist() == [1, 0, 1, 0, 0, 0]


def test_even_parity_bit_makes_the_count_of_ones_even():
    # common practice: even parity = total number of ones even
    fmt = parse_format("custom:bits=5,parity=even,start=0x0B,end=0x0F,lrc=off")
    assert fmt.char_bits(0x0B).tolist() == [1, 1, 0, 1, 0, 1]
    assert parity_bit(0x0F, fmt) == 0


def test_codes_outside_the_data_bits_are_refused():
    with pytest.raises(FormatError):
        ISO_BCD.char_bits(16)
    with pytest.raises(FormatError):
        ISO_ALPHA.char_of(-1)


def test_character_formats_are_immutable():
    with pytest.raises(dataclasses.FrozenInstanceError):
        ISO_BCD.data_bits = 5  # type: ignore[misc]


# --------------------------------------------------------------------------- tracks


def test_maximum_characters_per_track():
    # ISO/IEC 7811-2, ISO/IEC 7813, ISO 4909 (from memory of the standard): 79 / 40 / 107
    # characters incl. sentinels and LRC
    assert [TRACKS[n].max_chars for n in (1, 2, 3)] == [79, 40, 107]


def test_format_limits_are_those_of_the_longest_track():
    # ISO/IEC 7811-2 (from memory of the standard): 79 on track 1; 107 on track 3
    assert ISO_ALPHA.max_chars == 79
    assert ISO_BCD.max_chars == 107


def test_track_bit_densities():
    # ISO/IEC 7811-2: tracks 1 and 3 at 210 bpi, track 2 at 75 bpi
    assert [TRACKS[n].density_bpi for n in (1, 2, 3)] == [210.0, 75.0, 210.0]


def test_bit_cell_lengths():
    # derived from ISO/IEC 7811-2 densities: 25.4 mm / 210 = 121.0 um, 25.4 mm / 75 = 338.7 um
    assert TRACKS[1].bit_cell_m == pytest.approx(121.0e-6, abs=0.05e-6)
    assert TRACKS[2].bit_cell_m == pytest.approx(338.7e-6, abs=0.05e-6)


def test_track_character_formats():
    # ISO/IEC 7811-2: track 1 alphanumeric, tracks 2 and 3 numeric
    assert TRACKS[1].fmt is ISO_ALPHA
    assert TRACKS[2].fmt is ISO_BCD
    assert TRACKS[3].fmt is ISO_BCD


def test_clocking_zero_counts():
    # start sentinel about 7.4 mm from the card edge (from memory): 7.4 mm / 121.0 um ~ 61 and
    # 7.4 mm / 338.7 um ~ 22 leading zeros (derived)
    assert TRACKS[1].leading_zeros == TRACKS[3].leading_zeros == 61
    assert TRACKS[2].leading_zeros == 22
    assert round(7.4e-3 / TRACKS[1].bit_cell_m) == 61
    assert round(7.4e-3 / TRACKS[2].bit_cell_m) == 22


def test_auto_tries_both_iso_formats():
    assert set(f.name for f in KNOWN_FORMATS) == {"iso-alpha", "iso-bcd"}


# --------------------------------------------------------------------------- parse_format


def test_auto_means_no_fixed_format():
    assert parse_format("auto") is None


@pytest.mark.parametrize(
    "spec, expected",
    [("iso-alpha", ISO_ALPHA), ("iso-bcd", ISO_BCD), ("track1", ISO_ALPHA),
     ("track2", ISO_BCD), ("track3", ISO_BCD), ("ISO-BCD", ISO_BCD)],
)
def test_named_formats(spec, expected):
    assert parse_format(spec) is expected


def test_custom_format_with_every_key():
    fmt = parse_format(
        "custom:bits=5,parity=even,offset=0x30,start=0x0B,end=0x0F,sep=0x0D,lrc=off,"
        "max=64,name=myfmt"
    )
    assert fmt == CharFormat("myfmt", 5, "even", 0x30, 0x0B, 0x0F, 0x0D, False, 64)


def test_custom_format_defaults():
    fmt = parse_format("custom:bits=5,start=11,end=15")
    assert (fmt.parity, fmt.offset, fmt.lrc, fmt.separator_code, fmt.max_chars) == (
        "odd", 0x30, True, None, None)


def test_custom_offset_defaults_to_0x20_above_five_bits():
    assert parse_format("custom:bits=6,start=5,end=31").offset == 0x20


def test_custom_integers_may_be_decimal_or_hex():
    assert parse_format("custom:bits=4,start=11,end=0xF") == parse_format(
        "custom:bits=0x4,start=0x0B,end=15")


@pytest.mark.parametrize(
    "spec, named",
    [
        ("iso-beta", "iso-beta"),
        ("", "''"),
        ("custom:bits=9,start=1,end=2", "bits"),
        ("custom:bits=3,start=1,end=2", "bits"),
        ("custom:bits=4,start=16,end=2", "start"),
        ("custom:bits=4,start=1,end=0x10", "end"),
        ("custom:bits=4,start=1,end=2,sep=99", "sep"),
        ("custom:bits=4,start=3,end=3", "start and end"),
        ("custom:bits=4,start=1", "end"),
        ("custom:start=1,end=2", "bits"),
        ("custom:bits=4,start=1,end=2,colour=red", "colour"),
        ("custom:bits=4,start=1,end=2,parity=mark", "parity"),
        ("custom:bits=four,start=1,end=2", "bits"),
        ("custom:bits=4,start=1,end=2,lrc=maybe", "lrc"),
        ("custom:bits=4,start=1,end=2,bits=5", "bits"),
        ("custom:bits=4,start=1,end=2,max=1", "max"),
        ("custom:bits=4,start=1,end=2,name=iso-bcd", "name"),
    ],
)
def test_bad_format_strings_raise_one_line_errors_naming_the_bad_part(spec, named):
    with pytest.raises(FormatError) as info:
        parse_format(spec)
    message = str(info.value)
    assert "\n" not in message
    assert named in message


def test_unknown_format_error_lists_the_valid_names():
    with pytest.raises(FormatError) as info:
        parse_format("track4")
    for name in ("auto", "iso-alpha", "iso-bcd", "track1", "track2", "track3", "custom:"):
        assert name in str(info.value)


def test_all_zero_start_sentinel_is_refused():
    # ISO/IEC 7811-2: the start sentinel must stand out from the clocking zeros
    with pytest.raises(FormatError):
        parse_format("custom:bits=4,parity=even,start=0,end=15")
