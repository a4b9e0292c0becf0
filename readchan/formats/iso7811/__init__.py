"""ISO/IEC 7811 magnetic stripe framing: character sets and parity (:mod:`.charset`), characters
and LRC with the single-error correction (:mod:`.framing`), parity-guided recovery
(:mod:`.recover`), physical damage evidence (:mod:`.evidence`) and track density (:mod:`.density`)."""
