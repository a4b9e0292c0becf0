"""Specification of readchan.formats.iso7813: Luhn, ISO/IEC 7813 layouts, account-number masking.

Card data here is invented: names are made up and account numbers are invented digits with
a Luhn check digit appended (they belong to no issuer).
"""

from __future__ import annotations

import json
import re

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from stdnum import luhn

from readchan.errors import ParameterError
from readchan.formats.iso7813 import (
    CardFields,
    luhn_check_digit,
    luhn_valid,
    mask_pan,
    mask_text,
    parse_fields,
)

SETTINGS = settings(max_examples=100, deadline=None)
digits = st.text("0123456789", min_size=1, max_size=25)


def invented_pan(payload: str) -> str:
    """An invented account number: `payload` and its Luhn check digit."""
    return payload + luhn_check_digit(payload)


PAN16 = invented_pan("990012345678901")  # 16 digits
PAN19 = invented_pan("990012345678901234")  # 19 digits
TRACK1 = f"%B{PAN16}^QUILL/ODESSA M            ^2912101000000123000000?"
TRACK2 = f";{PAN16}=29121010000012300000?"

pans = st.text("0123456789", min_size=12, max_size=18).map(invented_pan)


# --------------------------------------------------------------------------- Luhn


def test_luhn_check_digit_of_7992739871_is_3():
    # ISO/IEC 7812-1 algorithm; worked example widely published
    assert luhn_check_digit("7992739871") == "3"
    assert luhn_valid("79927398713")


def test_luhn_check_digit_of_61248_is_1():
    # ISO/IEC 7812-1 algorithm; worked example widely published
    assert luhn_check_digit("61248") == "1"
    assert luhn_valid("612481")


@SETTINGS
@given(digits)
def test_luhn_check_digit_agrees_with_python_stdnum(payload):
    # ISO/IEC 7812-1 as implemented by python-stdnum (stdnum.luhn)
    assert luhn_check_digit(payload) == luhn.calc_check_digit(payload)


@SETTINGS
@given(digits)
def test_luhn_validity_agrees_with_python_stdnum(number):
    # ISO/IEC 7812-1 as implemented by python-stdnum (stdnum.luhn)
    assert luhn_valid(number) == luhn.is_valid(number) == (luhn.checksum(number) == 0)


@SETTINGS
@given(digits, st.integers(1, 9))
def test_changing_the_check_digit_breaks_luhn(payload, delta):
    # ISO/IEC 7812-1: exactly one check digit fits
    number = invented_pan(payload)
    wrong = str((int(number[-1]) + delta) % 10)
    assert not luhn_valid(number[:-1] + wrong)


def test_luhn_check_digit_refuses_non_digits():
    with pytest.raises(ParameterError):
        luhn_check_digit("1234 5678")


def test_luhn_valid_is_false_for_empty_or_non_digit_text():
    assert not luhn_valid("")
    assert not luhn_valid("7992739871x")


# --------------------------------------------------------------------------- masking


def test_sixteen_digits_show_the_first_6_and_last_4():
    # PCI DSS v3.2.1 req. 3.3: at most the first six and last four digits displayed
    assert mask_pan("9900123456789012") == "990012******9012"


def test_thirteen_digits_show_the_first_6_and_last_4():
    # PCI DSS v3.2.1 req. 3.3
    assert mask_pan("9900123456789") == "990012***6789"


def test_numbers_under_13_digits_show_only_the_last_4():
    # PCI DSS v3.2.1 req. 3.3 (at most); fewer shown on short numbers is our choice
    assert mask_pan("990012345678") == "********5678"
    assert mask_pan("12345") == "*2345"


def test_numbers_of_4_digits_or_fewer_are_masked_entirely():
    assert mask_pan("1234") == "****"
    assert mask_pan("") == ""


@SETTINGS
@given(st.text("0123456789", min_size=0, max_size=25))
def test_masking_keeps_the_length_and_shows_at_most_10_digits(pan):
    # PCI DSS v3.2.1 req. 3.3: at most the first six and last four digits
    masked = mask_pan(pan)
    assert len(masked) == len(pan)
    assert sum(ch.isdigit() for ch in masked) <= min(10, max(len(pan) - 1, 0))
    assert all(m in ("*", p) for m, p in zip(masked, pan))


# --------------------------------------------------------------------------- track 1 layout


def test_track1_format_b_fields():
    # ISO/IEC 7813 format code B: %B pan ^ name ^ YYMM svc discretionary ?
    fields = parse_fields(TRACK1, "iso-alpha")
    assert fields.layout == "iso7813-track1-B"
    assert fields.pan == PAN16
    assert fields.name == "QUILL/ODESSA M"
    assert fields.expiry_yymm == "2912"
    assert fields.service_code == "101"
    assert fields.discretionary == "000000123000000"
    assert fields.luhn_ok
    assert fields.problems == ()


def test_a_name_longer_than_26_characters_is_a_problem():
    # ISO/IEC 7813: name 2 to 26 characters
    text = f"%B{PAN16}^VANTERPOOL-MCALLISTER/IGNATZ^2912101?"
    fields = parse_fields(text, "iso-alpha")
    assert "name longer than 26 characters" in fields.problems


def test_a_name_shorter_than_2_characters_is_a_problem():
    # ISO/IEC 7813: name 2 to 26 characters
    fields = parse_fields(f"%B{PAN16}^Q^2912101?", "iso-alpha")
    assert "name shorter than 2 characters" in fields.problems


def test_an_expiry_month_out_of_range_is_a_problem():
    fields = parse_fields(f"%B{PAN16}^QUILL/ODESSA M^2913101?", "iso-alpha")
    assert fields.expiry_yymm == "2913"
    assert "expiry month 13 out of range" in fields.problems


def test_a_separator_stands_in_for_an_absent_expiry():
    # common practice: a field separator in place of an absent expiry date
    fields = parse_fields(f"%B{PAN16}^QUILL/ODESSA M^^101?", "iso-alpha")
    assert fields.expiry_yymm is None
    assert fields.service_code == "101"
    assert fields.discretionary == ""


def test_too_little_text_after_the_name_leaves_the_expiry_absent():
    fields = parse_fields(f"%B{PAN16}^QUILL/ODESSA M^29?", "iso-alpha")
    assert fields.expiry_yymm is None and fields.service_code is None
    assert fields.discretionary == "29"


def test_other_track1_format_codes_are_not_parsed():
    # ISO/IEC 7813: only format code B is the financial layout handled here
    assert parse_fields(f"%A{PAN16}^QUILL/ODESSA M^2912101?", "iso-alpha") is None


def test_track1_text_without_its_separators_is_not_parsed():
    assert parse_fields(f"%B{PAN16}QUILL?", "iso-alpha") is None
    assert parse_fields(f"%B{PAN16}^QUILL/ODESSA M?", "iso-alpha") is None


def test_a_failed_luhn_check_is_reported():
    bad = PAN16[:-1] + str((int(PAN16[-1]) + 1) % 10)
    fields = parse_fields(f"%B{bad}^QUILL/ODESSA M^2912101?", "iso-alpha")
    assert not fields.luhn_ok
    assert any("Luhn" in p for p in fields.problems)


def test_an_account_number_over_19_digits_is_a_problem():
    # ISO/IEC 7813: account number up to 19 digits
    fields = parse_fields(f";{PAN19}1=2912101?", "iso-bcd")
    assert any("19 digits" in p for p in fields.problems)


# --------------------------------------------------------------------------- track 2 layout


def test_track2_fields():
    # ISO/IEC 7813 track 2: ; pan = YYMM svc discretionary ?
    fields = parse_fields(TRACK2, "iso-bcd")
    assert fields.layout == "iso7813-track2"
    assert fields.pan == PAN16
    assert fields.name is None
    assert (fields.expiry_yymm, fields.service_code) == ("2912", "101")
    assert fields.discretionary == "0000012300000"
    assert fields.luhn_ok and fields.problems == ()


def test_track2_separator_placeholders_for_absent_expiry_and_service_code():
    # common practice: a field separator in place of each absent field
    fields = parse_fields(f";{PAN19}===77?", "iso-bcd")
    assert fields.expiry_yymm is None and fields.service_code is None
    assert fields.discretionary == "77"


def test_text_that_is_not_a_financial_layout_gives_none():
    assert parse_fields(";12345?", "iso-bcd") is None  # no separator
    assert parse_fields(f";{PAN16}=2912", "iso-bcd") is None  # no end sentinel
    assert parse_fields(f";{PAN16[:4]}:{PAN16[4:]}=2912?", "iso-bcd") is None
    assert parse_fields(TRACK2, "myfmt") is None  # a user's format


# --------------------------------------------------------------------------- JSON and masking


def test_json_dict_of_a_trusted_read_masks_the_account_number_by_its_layout():
    d = parse_fields(TRACK1, "iso-alpha").to_dict(trusted=True)
    assert d["pan"] == mask_pan(PAN16)
    assert d["pan_length"] == 16
    assert PAN16 not in json.dumps(d)


def test_json_dict_shows_the_account_number_when_unmasked():
    d = parse_fields(TRACK1, "iso-alpha").to_dict(unmask=True)
    assert d["pan"] == PAN16
    assert d["name"] == "QUILL/ODESSA M"
    assert json.loads(json.dumps(d)) == d


def test_the_repr_of_card_fields_masks_the_account_number():
    assert PAN16 not in repr(parse_fields(TRACK2, "iso-bcd"))
    assert isinstance(parse_fields(TRACK2, "iso-bcd"), CardFields)


def test_json_dict_of_an_untrusted_read_shows_no_account_digit():
    d = parse_fields(TRACK1, "iso-alpha").to_dict()
    assert d["pan"] == "*" * 16 and d["name"] == "QUILL/ODESSA M"
    assert not any(ch.isdigit() for ch in d["pan"])


def test_masked_text_of_a_trusted_read_masks_the_account_number_by_its_layout():
    # PCI DSS v3.2.1 req. 3.3: at most the first six and last four digits
    assert mask_text(TRACK1, "iso-alpha", trusted=True) == TRACK1.replace(PAN16, mask_pan(PAN16))
    assert mask_text(TRACK2, "iso-bcd", trusted=True) == TRACK2.replace(PAN16, mask_pan(PAN16))


def test_masked_text_of_an_untrusted_read_hides_every_digit_of_the_account_region():
    masked = mask_text(TRACK2, "iso-bcd")
    assert masked[:18] == ";" + "*" * 16 + "="


def test_a_digit_turned_separator_leaks_no_account_digit_from_text_or_fields():
    # one flipped bit turns the 7th account digit into '=': the rest of the account number
    # then looks like the expiry, service code and discretionary data
    text = f";{PAN16[:6]}={PAN16[7:]}=29121010000000000?"
    assert mask_text(text, "iso-bcd")[:18] == ";******=*********="
    d = parse_fields(text, "iso-bcd").to_dict()
    shown = json.dumps(d)
    for k in range(6, 16 - 4 + 1):
        assert PAN16[k:k + 4] not in shown


def test_unmasked_text_is_unchanged():
    assert mask_text(TRACK2, "iso-bcd", unmask=True) == TRACK2


def test_a_cut_short_track1_read_is_masked_too():
    text = f"%B{PAN16}^QUILL/OD"
    assert mask_text(text, "iso-alpha") == "%B" + "*" * 16 + "^QUILL/OD"


def test_a_damaged_account_number_has_every_digit_hidden():
    text = f";{PAN16[:7]}>{PAN16[8:]}=29121010000?"
    masked = mask_text(text, "iso-bcd")
    assert masked.startswith(";" + "*" * 7 + ">" + "*" * 8 + "=")


def test_a_semicolon_and_12_digits_without_a_layout_are_masked():
    text = ";" + PAN16[:12]
    assert mask_text(text, "iso-bcd") == ";" + "*" * 12


def test_long_digit_runs_in_a_users_format_are_masked():
    text = f"#REF{PAN19}#"
    assert mask_text(text, "myfmt") == f"#REF{mask_pan(PAN19)}#"


@SETTINGS
@given(pans, st.sampled_from(["iso-alpha", "iso-bcd"]), st.integers(0, 30))
def test_masked_text_never_holds_the_whole_account_number(pan, fmt_name, cut):
    text = (f"%B{pan}^QUILL/ODESSA M^2912101000?" if fmt_name == "iso-alpha"
            else f";{pan}=2912101000?")
    for shown in (text, text[: len(text) - cut]):
        masked = mask_text(shown, fmt_name)
        assert len(masked) == len(shown)
        assert pan not in masked
        assert not re.search(r"[0-9]{11,}", masked)
