"""Stage 4, line codes: cell timing from transitions (decode) and transition positions from bits
(encode).  :mod:`.f2f` for card stripes (ISO/IEC 7811-2), :mod:`.biphase` for biphase-mark tape
(the same code, with open ends and a period trace for play speeds of 0.1–10×)."""
