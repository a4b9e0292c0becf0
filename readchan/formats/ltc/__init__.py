"""Linear timecode (SMPTE ST 12-1 / IEC 60461): the 80-bit word (:mod:`.word`), frames found by
their sync word in either direction (:mod:`.frames`) and the timecode read (:mod:`.read`)."""

from readchan.formats.ltc.read import LtcEvent, LtcFrame, LtcRead, decode_ltc, ltc_json

__all__ = ["LtcEvent", "LtcFrame", "LtcRead", "decode_ltc", "ltc_json"]
