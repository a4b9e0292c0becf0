"""`readchan inspect`: the front-end diagnostics report (registered on the main app)."""
