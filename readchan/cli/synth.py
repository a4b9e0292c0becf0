"""`readchan synth`: a synthesized card capture of known content and impairments, written to a file
(registered on the app).  Tape captures are `readchan synth-ltc` and `readchan synth-kcs`
(:mod:`readchan.cli.synth_tape`, registered from here so that they follow `synth` in ``--help``)."""

from __future__ import annotations

from pathlib import Path
from typing import Optional

import typer

from readchan.cli.common import Output, PreampFamily, Profile, PulseKind, WriteKind, app, err, renamed
from readchan.errors import ParameterError


@app.command()
# Over 60 lines because typer reads the options from the signature, one parameter a line (some
# 45 of them); the body, some 40 lines, builds the spec from them and writes it.
def synth(
    output: Path = typer.Argument(..., help="File to write (.wav, .flac or .csv)."),
    track1: Optional[str] = typer.Option(None, "--track1", help="Track 1 text (alphanumeric, 210 bpi)."),
    track2: Optional[str] = typer.Option(None, "--track2", help="Track 2 text (numeric, 75 bpi)."),
    track3: Optional[str] = typer.Option(None, "--track3", help="Track 3 text (numeric, 210 bpi)."),
    bits: Optional[str] = typer.Option(None, "--bits", help="Raw bits (0/1) for one channel instead of text."),
    fmt: Optional[str] = typer.Option(None, "--format", "-f", help="Character format for --track1 text (custom formats)."),
    density_bpi: Optional[float] = typer.Option(None, "--density-bpi", help="Recording density in bpi (all tracks)."),
    speed_cm_s: float = typer.Option(30.0, "--speed-cm-s", help="Mean swipe speed in cm/s."),
    profile: Profile = typer.Option(Profile.swipe, help="Speed profile along the card (swipe and ramp take "
                                                        "--variation; with none, every profile is constant)."),
    variation: float = typer.Option(0.0, help="Speed variation along the card, fraction of the mean (ramp: ±; swipe: ±)."),
    pulse: PulseKind = typer.Option(PulseKind.karlqvist, help="Isolated-pulse model."),
    head_gap_um: float = typer.Option(12.0, "--head-gap-um", help="Karlqvist head gap g in µm."),
    spacing_um: float = typer.Option(5.0, "--spacing-um", help="Head-to-medium spacing d in µm."),
    transition_um: float = typer.Option(15.0, "--transition-um", help="Arctan transition parameter a in µm."),
    pw50_um: Optional[float] = typer.Option(None, "--pw50-um", help="Lorentzian PW50 in µm (with --pulse lorentzian)."),
    rate_hz: float = typer.Option(48000.0, "--rate-hz", help="Sample rate in Hz."),
    amplitude: float = typer.Option(0.5, help="Isolated-pulse peak at the mean speed (full scale)."),
    snr_db: Optional[float] = typer.Option(None, "--snr-db", help="White-noise SNR in dB (median |peak| / noise RMS)."),
    jitter: float = typer.Option(0.0, help="Per-transition jitter, uniform ± fraction of a bit cell."),
    density_error: float = typer.Option(0.0, "--density-error", help="Fractional density error (+0.05 = 5 % dense)."),
    hum_hz: float = typer.Option(50.0, "--hum-hz", help="Mains hum frequency in Hz."),
    hum_level: float = typer.Option(0.0, "--hum-level", help="Hum amplitude, fraction of the median peak."),
    wander_level: float = typer.Option(0.0, "--wander-level", help="2 Hz baseline wander, fraction of the median peak."),
    dc_offset: float = typer.Option(0.0, "--dc-offset", help="DC offset in full-scale units."),
    ac_coupling_hz: Optional[float] = typer.Option(None, "--ac-coupling-hz", help="First-order AC-coupling corner in Hz."),
    preamp_lowpass_hz: Optional[float] = typer.Option(None, "--preamp-lowpass-hz", help="Causal preamp low-pass corner (-3 dB) in Hz; renders oversampled."),
    preamp_order: int = typer.Option(2, "--preamp-order", min=1, max=4, help="Preamp low-pass order, 1 to 4."),
    preamp_family: PreampFamily = typer.Option(PreampFamily.butterworth, "--preamp-family", help="Preamp low-pass family."),
    antialias: bool = typer.Option(True, "--antialias/--no-antialias", help="Decimate through a linear-phase anti-alias filter (sound card) or take samples as they are (scope)."),
    quantize_bits: Optional[int] = typer.Option(None, "--quantize-bits", help="Quantise to N bits over full scale ±1."),
    scope_volts_per_div: Optional[float] = typer.Option(None, "--scope-volts-per-div", help="Quantise as an 8-bit oscilloscope at this V/div."),
    scope_offset_v: float = typer.Option(0.0, "--scope-offset-v", help="Oscilloscope screen-centre voltage."),
    scope_divisions: int = typer.Option(8, "--scope-divisions", help="Vertical divisions of the oscilloscope's 256 levels (8 or 10)."),
    clip: Optional[float] = typer.Option(None, help="Clip at this fraction of the median peak."),
    invert: bool = typer.Option(False, help="Invert the polarity."),
    reverse: bool = typer.Option(False, help="Swipe the card backwards."),
    edge_pulses: bool = typer.Option(False, "--edge-pulses", help="Stripe magnetised to the card's edges: a half-size pulse at each."),
    swipes: int = typer.Option(1, help="Number of swipes in the capture."),
    pause_s: float = typer.Option(0.25, "--pause-s", help="Quiet time between swipes in seconds."),
    signal: Output = typer.Option(Output.head, help="head: pickup voltage; flux: magnetisation square wave (coil drive)."),
    file_type: WriteKind = typer.Option(WriteKind.wav16, "--file-type", help="Type of the file written."),
    seed: int = typer.Option(0, help="Random seed."),
    force: bool = typer.Option(False, help="Overwrite OUTPUT if it exists (a regular file only), and write it even "
                               "at a sample rate that undersamples the pulses."),
    gap_um_old: Optional[float] = typer.Option(None, "--gap-um", hidden=True, help="Old spelling of --head-gap-um."),
    gap_s_old: Optional[float] = typer.Option(None, "--gap-s", hidden=True, help="Old spelling of --pause-s."),
    kind_old: Optional[WriteKind] = typer.Option(None, "--kind", hidden=True, help="Old spelling of --file-type."),
) -> None:
    """Synthesize a card capture of known content and known impairments (one channel per track); tape: synth-ltc, synth-kcs."""
    from readchan.io.atomic import check_output_path
    from readchan.io.capture import display_path, write_capture
    from readchan.formats.iso7811.charset import parse_format
    from readchan.synth import SAMPLE_LIMIT, FrontEnd, Impairments, SpeedProfile, SynthSpec, synthesize
    from readchan.synth.card import parse_bits, track_content
    from readchan.synth.head import KarlqvistPulse, LorentzianPulse

    gap_um = renamed("--gap-um", "--head-gap-um", gap_um_old, head_gap_um, 12.0)
    gap_s = renamed("--gap-s", "--pause-s", gap_s_old, pause_s, 0.25)
    kind = renamed("--kind", "--file-type", kind_old, file_type, WriteKind.wav16)
    if fmt is not None and fmt.strip().lower() in ("ltc", "kcs"):
        raise ParameterError(f"tape captures have their own commands: readchan synth-{fmt.strip().lower()} OUT ...")
    check_output_path(output, force=force)   # before the work: exists, not a regular file, no directory
    custom = parse_format(fmt) if fmt else None
    tracks = []
    for n, text in ((1, track1), (2, track2), (3, track3)):
        if text is not None:
            tracks.append(track_content(text, track=n, fmt=custom if n == 1 else None, density_bpi=density_bpi))
    if bits is not None:
        tracks.append(track_content(bits=parse_bits(bits), density_bpi=density_bpi))
    if not tracks:
        raise ParameterError("give the content: --track1, --track2, --track3 and/or --bits")
    if pulse is PulseKind.lorentzian:
        head = LorentzianPulse(pw50_m=(pw50_um if pw50_um is not None else 42.0) * 1e-6)
    else:
        if pw50_um is not None:
            raise ParameterError("--pw50-um goes with --pulse lorentzian; the Karlqvist pulse takes --head-gap-um, --spacing-um, --transition-um")
        head = KarlqvistPulse(gap_um * 1e-6, spacing_um * 1e-6, transition_um * 1e-6)
    imp = Impairments(density_error=density_error, jitter=jitter, snr_db=snr_db, hum_hz=hum_hz, hum_level=hum_level,
                      wander_level=wander_level, dc_offset=dc_offset, clip=clip,
                      invert=invert, reverse=reverse, edge_pulses=edge_pulses)
    fe = FrontEnd(ac_coupling_hz=ac_coupling_hz, preamp_lowpass_hz=preamp_lowpass_hz, preamp_order=preamp_order,
                  preamp_family=preamp_family.value, antialias=antialias, quantize_bits=quantize_bits,
                  scope_volts_per_div=scope_volts_per_div, scope_offset_v=scope_offset_v,
                  scope_divisions=scope_divisions)
    spec = SynthSpec(tracks=tuple(tracks), speed=SpeedProfile(speed_cm_s, profile.value, variation), pulse=head,
                     rate_hz=rate_hz, amplitude=amplitude, impairments=imp, swipes=swipes, gap_s=gap_s,
                     output=signal.value, seed=seed, front_end=fe)
    if not force:
        _refuse_undersampling(spec)
    res = synthesize(spec, max_samples=None if force else SAMPLE_LIMIT)
    names = [t.label.replace(" ", "") or f"ch{i}" for i, t in enumerate(tracks)]
    path = write_capture(output, res.samples, res.rate_hz, kind=kind.value, force=force, channel_names=names)
    err.print(f"wrote {display_path(path)}: {len(tracks)} channel(s), {res.duration_s:.3f} s at {res.rate_hz:g} Hz, "
              f"PW50 {res.pw50_m * 1e6:.1f} µm, {swipes} swipe(s)")


def _refuse_undersampling(spec) -> None:
    """A one-line error when ``spec``'s rate gives fewer than about 3 samples per half cell or
    2 per PW50 at the profile's fastest speed (:mod:`readchan.frontend.sampling`)."""
    import numpy as np

    from readchan.frontend.sampling import synth_sampling

    v_max = float(np.max(spec.speed.speed_cm_s(np.linspace(0.0, 1.0, 1001))))
    for n, t in enumerate(spec.tracks):
        cell_m = t.cell_m / (1 + spec.impairments.density_error)
        smp = synth_sampling(spec.rate_hz, cell_m, spec.pulse.pw50_m, v_max, pulses=spec.output == "head")
        if smp.undersampled:
            label = t.label or f"channel {n}"
            raise ParameterError(f"--rate-hz {spec.rate_hz:g} undersamples {label} at up to {v_max:.3g} cm/s "
                                 f"({smp.text().split(': ', 1)[1]}); raise the rate or pass --force")


from readchan.cli import synth_tape  # noqa: E402,F401,I001  (registers synth-ltc and synth-kcs after synth)
