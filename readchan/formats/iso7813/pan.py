"""The account number (PAN): its length limit, its Luhn check digit, and its mask.

Input: a string of digits.  Output: the Luhn check digit or verdict (ISO/IEC 7812-1,
annex B), or the number with its hidden digits replaced by :data:`MASK_CHAR` (PCI DSS v3.2.1
requirement 3.3: at most the first 6 and last 4 digits shown).
"""

from __future__ import annotations

import re

from readchan.errors import ParameterError


MASK_CHAR = "*"


#: Longest account number (ISO/IEC 7812-1, ISO/IEC 7813).
MAX_PAN_DIGITS = 19


#: Shortest account number shown with its first 6 digits; shorter ones show only the last 4.
FULL_MASK_MIN_DIGITS = 13


def luhn_check_digit(payload: str) -> str:
    """Luhn check digit to append to `payload` (ISO/IEC 7812-1, annex B).

    Parameters
    ----------
    payload : str
        Digits of the account number without its check digit (may be empty).

    Returns
    -------
    str
        One digit such that ``payload + digit`` passes :func:`luhn_valid`.

    Raises
    ------
    ParameterError
        If `payload` holds anything but ASCII digits.

    Examples
    --------
    >>> luhn_check_digit('7992739871')
    '3'
    """
    if not is_digits(payload, allow_empty=True):
        raise ParameterError(
            f"account number must be ASCII digits only ({len(payload)} characters given)"
        )
    return str((10 - _luhn_sum(payload + "0")) % 10)


def luhn_valid(number: str) -> bool:
    """True if the last digit of `number` is its Luhn check digit (ISO/IEC 7812-1).

    Returns False (never raises) for an empty string or one with non-digits.

    Examples
    --------
    >>> luhn_valid('79927398713'), luhn_valid('79927398710')
    (True, False)
    """
    return is_digits(number) and _luhn_sum(number) == 0


def mask_pan(pan: str) -> str:
    """Account number with the hidden digits replaced by ``'*'``.

    Numbers of 13 digits or more show their first 6 and last 4 digits, shorter ones only the
    last 4, and numbers of 4 digits or fewer nothing (PCI DSS v3.2.1 req. 3.3 allows at most
    the first 6 and last 4). The length is kept.

    Examples
    --------
    >>> mask_pan('9900123456789017')
    '990012******9017'
    >>> mask_pan('12345678')
    '****5678'
    """
    n = len(pan)
    if n <= 4:
        return MASK_CHAR * n
    head = 6 if n >= FULL_MASK_MIN_DIGITS else 0
    return pan[:head] + MASK_CHAR * (n - head - 4) + pan[-4:]


def hide_digits(text: str) -> str:
    return "".join(MASK_CHAR if "0" <= ch <= "9" else ch for ch in text)


def hide_quoted(problem: str) -> str:
    """A problem message with the digits it quotes from the text hidden (its own numbers,
    such as "3 digits", stay)."""
    problem = re.sub(r"'[^']*'", lambda m: hide_digits(m.group()), problem)
    return re.sub(r"month \d+", lambda m: hide_digits(m.group()), problem)


def is_digits(text: str, allow_empty: bool = False) -> bool:
    if not isinstance(text, str):
        return False
    return (allow_empty or bool(text)) and all("0" <= ch <= "9" for ch in text)


def _luhn_sum(number: str) -> int:
    """Luhn sum modulo 10: from the right, every second digit doubled (digits of the product
    added), all summed."""
    total = 0
    for i, ch in enumerate(reversed(number)):
        d = ord(ch) - 48
        if i % 2:
            d *= 2
            if d > 9:
                d -= 9
        total += d
    return total % 10
