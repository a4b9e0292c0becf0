"""Stages 2 and 3, the front end and the transition detectors.

Input: one channel's samples (volts or counts) and the sample rate in Hz.
Output: :class:`readchan.frontend.detect.Transitions` (sub-sample times, absolute sample
positions, amplitudes, flags) and the conditioned signal; :mod:`.segment` cuts transitions into
stretches of continuous recording."""
