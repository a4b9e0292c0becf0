"""Stage 1, sources: the capture type (samples × channels, rate, units) and its loader
(:mod:`.capture`), reading WAV/FLAC/AIFF (:mod:`.audio`) and text tables (:mod:`.text`) with the
checks they share (:mod:`.checks`); writing captures (:mod:`.write`) through the safe writer
every output goes through (:mod:`.atomic`)."""
