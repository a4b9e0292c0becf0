"""Tape read channels: linear timecode (SMPTE ST 12-1 / IEC 60461) and Kansas City cassette data.

Input: samples of one channel (1-D, or samples × channels) and the sample rate.
Output: a frozen read per format (:class:`LtcRead`, :class:`KcsRead`) and its JSON dict.

Stages: transitions (``readchan.detect``) → biphase-mark bits (:mod:`.biphase`, on
``readchan.timing``) → 80-bit frames (:mod:`.ltc_frames`, :mod:`.ltc_word`) → the timecode read
(:mod:`.ltc`); tone zero crossings → FSK bits and start/stop bytes (:mod:`.kcs`).  The
synthesizers are :mod:`.synth_ltc` and :mod:`.synth_kcs` over :mod:`.playback`.
"""

from readchan.tape.ltc import LtcEvent, LtcFrame, LtcRead, decode_ltc, ltc_json

__all__ = ["LtcEvent", "LtcFrame", "LtcRead", "decode_ltc", "ltc_json"]

from readchan.tape.kcs import KcsRead, decode_kcs, kcs_json  # noqa: E402

__all__ += ["KcsRead", "decode_kcs", "kcs_json"]
