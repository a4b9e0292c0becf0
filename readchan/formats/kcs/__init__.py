"""Kansas City standard cassette data (1976): FSK tones to start/stop bytes (:mod:`.read`) and the
family's channel decoder for the format registry (:mod:`.channel`)."""

from readchan.formats.kcs.read import KcsRead, decode_kcs, kcs_json

__all__ = ["KcsRead", "decode_kcs", "kcs_json"]
