"""Diagnostics: what a channel holds and why a read fails (:mod:`.status`), and the measured
quantities of a read (:mod:`.diagnose`: amplitude, noise, pulse width, speed, timing margin)."""
