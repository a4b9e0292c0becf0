"""Forward model of the read channel: bits → F2F flux transitions → head voltage.

Input: a :class:`SynthSpec` (tracks, speed, pulse, impairments, front end, rate in Hz).
Output: a :class:`SynthResult` (samples and their truth).

The same physics the decoder inverts, run forward (see :mod:`readchan.synth.head` for the
pulse models and their sources):

1. Each track's bit stream (clocking zeros, characters, LRC, clocking zeros) becomes F2F
   transition positions along the card at the track's density (:mod:`.f2f`), with optional
   density error and per-transition jitter (a uniform displacement in ± ``jitter`` cells).
2. A speed profile (:mod:`.speed`) maps position to time; a reverse swipe mirrors the card.
3. Head voltage: pulses superposed with alternating sign, each shaped in space, so
   intersymbol interference and peak shift arise by themselves, and scaled by the
   instantaneous speed, since the head sees dΦ/dt = v·dΦ/dx (Faraday's law):
   ``V(t) = A · v(t)/v0 · Σ_k s_k · p(x_head(t) − x_k)``.
   The flux output is the magnetisation square wave instead: what a coil must be driven
   with to inject a card-like signal into a reader's head.
4. Impairments at the head: white noise at a stated SNR (20·log10 of the median |peak| over
   the noise RMS in the band up to the output's Nyquist frequency), mains hum, baseline
   wander, clipping at a fraction of the median peak, DC offset, polarity inversion.
5. The reader's front end (:mod:`.chain`): AC coupling, a causal preamp low-pass, anti-alias
   decimation and quantisation.  With a preamp low-pass, steps 1–5 run at ``oversample`` × the
   output rate and the chain decimates to it.

Everything is seeded: the same spec and seed give the same samples.

The spec and result types are :mod:`.spec`'s and the renderer :mod:`.model`'s; this package
re-exports their public names.
"""

from __future__ import annotations

from readchan.synth.chain import FrontEnd
from readchan.synth.head import KarlqvistPulse, LorentzianPulse
from readchan.synth.model import synthesize
from readchan.synth.speed import SpeedProfile
from readchan.synth.spec import (CARD_LENGTH_M, FIRST_TRANSITION_M, HARD_SAMPLE_LIMIT, SAMPLE_LIMIT, Impairments,
                                 SynthResult, SynthSpec, TrackContent, estimate_samples)

__all__ = [
    "CARD_LENGTH_M",
    "FIRST_TRANSITION_M",
    "FrontEnd",
    "HARD_SAMPLE_LIMIT",
    "Impairments",
    "KarlqvistPulse",
    "LorentzianPulse",
    "SpeedProfile",
    "SynthResult",
    "SynthSpec",
    "SAMPLE_LIMIT",
    "TrackContent",
    "estimate_samples",
    "synthesize",
]
