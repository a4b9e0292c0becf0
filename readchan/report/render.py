"""Rendering of decode results: JSON-ready dictionaries and rich tables.

Input: :class:`readchan.results.ChannelResult` s and their :class:`readchan.results.Read` s.
Output: JSON-ready dicts (through each format's renderer), rich tables and text lines, exit codes.

Account numbers are masked in every output unless the caller passes ``unmask=True``
(at most the first 6 and last 4 digits shown; PCI DSS v3.2.1 requirement 3.3).
"""

from __future__ import annotations

import numpy as np
from rich.console import Console
from rich.table import Table
from rich.text import Text

from readchan.channel import ChannelResult, Read
from readchan.errors import EXIT_INVALID, EXIT_NO_DATA, EXIT_VALID
from readchan.formats.iso7813 import mask_text
from readchan.formats.iso7811.framing import missing_end


def track_keys(r: Read) -> dict:
    """The assumed track's basis and evidence: keys shared by the decode and inspect JSON."""
    ev = r.track_evidence
    return {"track_basis": None if ev is None else ev.basis, "track_evidence": None if ev is None else ev.text()}


def verdict_keys(r: Read, *, unmask: bool = False) -> dict:
    """The (masked) text and why the read is or is not valid: keys shared by the decode and inspect JSON."""
    f = r.frame
    return {
        "text": mask_text(f.text, f.format, unmask, trusted=r.valid),
        "valid": bool(r.valid),
        "checks_ok": bool(f.valid),
        "rejected": r.rejected,
        "damaged_chars": [{"char": c, "evidence": list(kinds)} for c, kinds in r.damaged_chars],
        "field_errors": list(r.field_errors),
    }


def read_dict(r: Read, *, unmask: bool = False) -> dict:
    """One read of any format as a JSON-ready dict, rendered by its registered format (stable
    keys; see the README)."""
    from readchan.formats.registry import read_json

    return read_json(r, unmask=unmask)


def card_reads(reads: list[Read]) -> list[Read]:
    """The card reads among ``reads`` (their payload has a frame)."""
    return [r for r in reads if hasattr(r.payload, "frame")]


def card_read_json(r: Read, unmask: bool = False) -> dict:
    """A card read as a JSON-ready dict (the card format's renderer in the registry)."""
    f = r.frame
    return {
        "source": r.source,
        "channel": r.channel,
        "format": r.format,
        "track": r.track.number if r.track else None,
        **track_keys(r),
        "direction": f.direction,
        **verdict_keys(r, unmask=unmask),
        "complete": bool(f.complete),
        "parity_failed": [int(i) for i in (~np.asarray(f.parity_ok, bool)).nonzero()[0]],
        "lrc_ok": bool(f.lrc_ok),
        "corrected": [int(c) for c in f.corrected],
        "revised_bits": [int(b) for b in f.revised_bits],
        "bits": int(len(r.bits)),
        "characters": len(f.text),
        "start_s": round(float(r.start_s), 6),
        "end_s": round(float(r.end_s), 6),
        "mean_speed_cm_s": None if r.mean_speed_cm_s is None else round(r.mean_speed_cm_s, 2),
        "fields": None if r.fields is None else r.fields.to_dict(unmask=unmask, trusted=r.valid),
        "recovery": None if r.recovery is None else {
            "candidates": r.recovery.candidates,
            "passing": r.recovery.passing,
            "accepted": r.recovery.frame is not None,
            "searched_bits": list(r.recovery.searched),
        },
    }


def reads_of(results: list[ChannelResult]) -> list[Read]:
    return [r for ch in results for r in ch.reads]


def exit_code(reads: list[Read], results: list[ChannelResult] | None = None) -> int:
    """0 when every read is valid, 1 when some read is not or some channel holds a regular F2F
    recording that gave no read (:mod:`readchan.measure.status`), 3 when there is neither.  A channel
    without activity does not change the code."""
    unread = any(ch.status is not None and ch.status.unread_recording for ch in results or ())
    if not reads:
        return EXIT_INVALID if unread else EXIT_NO_DATA
    return EXIT_VALID if all(r.valid for r in reads) and not unread else EXIT_INVALID


def channel_dict(ch: ChannelResult, source: str = "") -> dict:
    """One channel's state as a JSON-ready dict: reads, state, why no read, sampling."""
    st = ch.status
    return {
        "source": source,
        "channel": ch.channel,
        "kind": ch.kind,
        "family": ch.family,
        "transitions": len(ch.transitions),
        "reads": len(ch.reads),
        "state": None if st is None else st.state,
        "reason": None if st is None or not st.reason else st.reason,
        "recording": None if st is None else st.recording,
        "clipped_fraction": None if st is None else round(st.clipped_fraction, 6),
        "undersampled": None if st is None else st.sampling.undersampled,
        "half_cell_samples": None if st is None or st.sampling.half_cell_samples is None
        else round(st.sampling.half_cell_samples, 3),
        "pw50_samples": None if st is None or st.sampling.pw50_samples is None else round(st.sampling.pw50_samples, 3),
    }


def no_read_lines(source: str, results: list[ChannelResult]) -> list[Text]:
    """One line per channel without a read: why (:mod:`readchan.measure.status`)."""
    lines = []
    for ch in results:
        if ch.reads:
            continue
        st = ch.status
        why = st.reason if st is not None else f"{len(ch.transitions)} transitions"
        style = "bold red" if st is not None and st.unread_recording else "yellow"
        line = Text(f"channel {ch.channel}: ")
        line.append("no framed data", style=style)
        line.append(f": {why}")
        lines.append(line)
    return lines


def warning_lines(source: str, results: list[ChannelResult]) -> list[str]:
    """``readchan: warning: ...`` lines for channels whose pulses are undersampled."""
    out = []
    for ch in results:
        st = ch.status
        if st is not None and st.sampling.undersampled and (ch.reads or len(ch.transitions)):
            out.append(f"readchan: warning: {source} channel {ch.channel}: {st.sampling.text()}; "
                       "speed, PW50 and margins are not to be trusted")
    return out


def verdict_text(r: Read) -> Text:
    """``valid``; ``invalid`` (the checks failed); ``suspect c1,c2`` (the checks pass but
    physical damage lies in those characters); ``fields`` (a broken ISO/IEC 7813 layout)."""
    if r.valid:
        return Text("valid", style="green")
    if r.rejected == "suspect":
        return Text("suspect " + ",".join(str(c) for c, _ in r.damaged_chars), style="bold red")
    if r.rejected is not None:
        return Text(r.rejected, style="bold red")
    return Text("invalid", style="bold red")


def _verdict(ok: bool, good: str = "ok", bad: str = "FAIL") -> Text:
    return Text(good, style="green") if ok else Text(bad, style="bold red")


def decode_table(reads: list[Read], *, unmask: bool = False, title: str | None = None) -> Table:
    """A rich table with one row per read; the characters follow in :func:`text_lines`."""
    t = Table(title=title, show_lines=False, header_style="bold", title_justify="left")
    for col in ("read", "ch", "track", "format", "direction", "chars", "parity", "LRC", "verdict", "bits", "cm/s",
                "time s"):
        t.add_column(col, no_wrap=True)
    for n, r in enumerate(reads):
        f = r.frame
        bad = [i for i, ok in enumerate(f.parity_ok) if not ok]
        parity = _verdict(not bad, "ok", f"{len(bad)} bad")
        if f.corrected:
            how = "recovered" if r.recovery is not None and r.recovery.frame is not None else "corrected"
            parity = Text(f"{how} {','.join(map(str, f.corrected))}", style="yellow")
        lrc = _verdict(f.lrc_ok) if f.complete else Text(missing_end(f), style="bold red")
        speed = "" if r.mean_speed_cm_s is None else f"{r.mean_speed_cm_s:.1f}"
        track = "?" if r.track is None else str(r.track.number)
        if r.track is not None and r.track_evidence is not None and r.track_evidence.ambiguous:
            track += "?"                 # assumed, not decided: see the track line
        t.add_row(str(n), str(r.channel), track, f.format, f.direction,
                  str(len(f.text)), parity, lrc, verdict_text(r), str(len(r.bits)), speed,
                  f"{r.start_s:.3f}–{r.end_s:.3f}")
    return t


def text_lines(reads: list[Read], *, unmask: bool = False) -> list[Text]:
    """One line per read: its number, a validity mark and its characters (account masked)."""
    lines = []
    for n, r in enumerate(reads):
        mark = Text("valid  ", style="green") if r.valid else Text("INVALID", style="bold red")
        line = Text(f"read {n}  ")
        line.append(mark)
        line.append("  " + mask_text(r.frame.text, r.frame.format, unmask, trusted=r.valid))
        if r.rejected == "suspect":
            where = "; ".join(f"char {c}: {', '.join(k)}" for c, k in r.damaged_chars)
            line.append(f"  (checks pass, but damage in more than one character: {where})", style="yellow")
        elif r.rejected == "fields":
            line.append(f"  (checks pass, but the ISO/IEC 7813 layout is broken: {'; '.join(r.field_errors)})",
                        style="yellow")
        lines.append(line)
    return lines


def field_lines(reads: list[Read], *, unmask: bool = False) -> list[Text]:
    """One line per read with parsed ISO/IEC 7813 fields (account masked unless ``unmask``)."""
    lines = []
    for n, r in enumerate(reads):
        if r.fields is None:
            continue
        d = r.fields.to_dict(unmask=unmask, trusted=r.valid)
        line = Text(f"read {n}  {d['layout']}: account {d['pan']} (Luhn ")
        line.append(_verdict(bool(d["luhn_ok"]), "ok", "FAIL"))
        line.append(")")
        for key, label in (("name", "name"), ("expiry_yymm", "expiry"), ("service_code", "service"),
                           ("discretionary", "discretionary")):
            if d.get(key):
                line.append(f" · {label} {d[key]}")
        for p in d.get("problems", []):
            line.append(f" · {p}", style="yellow")
        lines.append(line)
    return lines


def track_lines(reads: list[Read]) -> list[Text]:
    """One line per read: the track assumed and on what evidence (:mod:`readchan.formats.iso7811.density`)."""
    lines = []
    for n, r in enumerate(reads):
        ev = r.track_evidence
        if ev is not None:
            lines.append(Text(f"read {n}  {ev.text()}", style="yellow" if ev.ambiguous else ""))
    return lines


def print_decode(console: Console, source: str, results: list[ChannelResult], *, unmask: bool = False) -> None:
    """Every channel of one capture: the reads' table, characters, tracks and fields, and a
    line for each channel that gave no read."""
    from readchan.report.tape import print_tape_reads

    every = reads_of(results)
    reads = card_reads(every)
    if not every:
        console.print(Text(source, style="bold"))
    elif reads:
        console.print(decode_table(reads, unmask=unmask, title=source))
        for line in text_lines(reads, unmask=unmask):
            console.print(line, soft_wrap=True)
        for line in track_lines(reads):
            console.print(line, soft_wrap=True)
        for line in field_lines(reads, unmask=unmask):
            console.print(line, soft_wrap=True)
    print_tape_reads(console, source, [r for r in every if not hasattr(r.payload, "frame")])
    for line in no_read_lines(source, results):
        console.print(line, soft_wrap=True)
