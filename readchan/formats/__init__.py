"""Stages 5 and 6, formats: framers and interpreters, registered once in :mod:`.registry`.

:mod:`.iso7811` (card characters, parity, LRC, correction, recovery, track density) and
:mod:`.iso7813` (financial card fields, Luhn, masking); :mod:`.ltc` (SMPTE ST 12-1 timecode
frames); :mod:`.kcs` (Kansas City cassette bytes)."""
