"""Diagnostics: what a channel holds and why a read fails (:mod:`.status`), and the measured
quantities of a read, assembled by :mod:`.diagnose` from :mod:`.front_end` (with :mod:`.noise`
and :mod:`.hum`), :mod:`.amplitude`, :mod:`.pulse`, :mod:`.timing`, :mod:`.anomalies` and
:mod:`.verdict`."""
