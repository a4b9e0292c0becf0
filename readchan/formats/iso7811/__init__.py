"""ISO/IEC 7811 magnetic stripe framing: character formats and parity (:mod:`.charformat`), the ISO
formats, tracks and format strings (:mod:`.charset`), characters as bits and the LRC
(:mod:`.codes`), framing (:mod:`.framing`) of candidate reads with the single-error correction
(:mod:`.candidate`), parity-guided recovery (:mod:`.recover`), physical damage evidence
(:mod:`.evidence`), track density (:mod:`.density`) and the card format over the read channel
(:mod:`.card`)."""
