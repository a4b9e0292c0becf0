"""Evaluation: parameter sweeps of the synthesizer through the read channel (:mod:`.sweep`)."""
