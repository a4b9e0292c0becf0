"""Stage 1, sources: the capture type (samples × channels, rate, units) read from WAV/FLAC/CSV,
and the safe writer every output goes through (:mod:`.capture`, :mod:`.atomic`)."""
