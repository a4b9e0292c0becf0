"""The command line: one thin module per command (:mod:`.decode`, :mod:`.synth`, :mod:`.inspect`,
:mod:`.sweep`) on the shared options of :mod:`.common`; the entry point is :func:`.main.main`."""
