"""Evaluation: parameter sweeps of the synthesizer through the read channel (:mod:`.sweep`), their
scenarios (:mod:`.scenario`), trials (:mod:`.trial`) and plot (:mod:`.plot`), and the process-pool
runner the sweeps and the benchmark scripts share (:mod:`.runner`)."""
