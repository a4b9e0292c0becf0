"""Stage 7, reports rendered from results, never computed there: text tables and JSON
(:mod:`.render`, :mod:`.inspect`), plots (:mod:`.plot`, matplotlib, imported only when plotting)."""
