"""Account numbers stay masked on every output path, for damaged and undamaged cards.

PCI DSS v3.2.1 req. 3.3: at most the first six and last four digits of an account number may
be displayed.  The card content is invented (made-up name, account number with prefix 99).
"""

from __future__ import annotations

import json
import re
import warnings

import matplotlib.text
import numpy as np
import pytest
import soundfile as sf

from conftest import run_cli as run
from readchan.io.capture import Capture
from readchan.measure.diagnose import inspect_capture
from readchan.formats.iso7811.charset import TRACKS
from readchan.report.plot import report_figure
from readchan.synth import Impairments, SpeedProfile, SynthSpec, TrackContent, synthesize
from readchan.synth.card import track_content

PAN = "9912345678901239"
TEXT = f";{PAN}=29121010000000000?"
HIDDEN = range(6, len(PAN) - 4)          # the digits no output may show


def _leaks(text: str) -> list[str]:
    """Runs of 4 account digits, at their places in the account number, that take in a hidden
    digit, found in ``text`` once decimal numbers (measurements) are taken out."""
    scrubbed = re.sub(r"\d*\.\d+", " ", text)
    windows = {PAN[k:k + 4] for k in range(len(PAN) - 3) if any(k <= h < k + 4 for h in HIDDEN)}
    return sorted(w for w in windows if w in scrubbed)


def _json_strings(doc) -> str:
    if isinstance(doc, dict):
        return " ".join(_json_strings(v) for v in doc.values())
    if isinstance(doc, list):
        return " ".join(_json_strings(v) for v in doc)
    return doc if isinstance(doc, str) else ""


def _card_bits(damaged: bool) -> np.ndarray:
    tc = track_content(TEXT, track=2)
    bits = tc.bits.copy()
    if damaged:
        # the 7th account digit '5' (0x05) becomes '=' (0x0D): data bit 3 of character 7 flipped
        bits[TRACKS[2].leading_zeros + 7 * TRACKS[2].fmt.bits_per_char + 3] ^= 1
    return bits


@pytest.fixture(scope="module")
def captures(tmp_path_factory):
    out = {}
    d = tmp_path_factory.mktemp("cards")
    for damaged in (False, True):
        res = synthesize(SynthSpec(tracks=(TrackContent(_card_bits(damaged), TRACKS[2].density_bpi),),
                                   speed=SpeedProfile(30.0), impairments=Impairments(snr_db=36.0), seed=11))
        path = d / f"card-{'damaged' if damaged else 'good'}.wav"
        sf.write(path, res.samples, int(res.rate_hz), subtype="PCM_24")
        out[damaged] = (path, Capture(res.samples, res.rate_hz, source=str(path), units="FS"))
    return out


@pytest.mark.parametrize("damaged", [False, True])
def test_no_cli_output_path_shows_hidden_account_digits(monkeypatch, capsys, captures, damaged):
    path, _ = captures[damaged]
    with warnings.catch_warnings():
        warnings.simplefilter("always")
        code, table, err1 = run(monkeypatch, capsys, "decode", path)
        _, doc, err2 = run(monkeypatch, capsys, "decode", "--json", path)
        _, report, err3 = run(monkeypatch, capsys, "inspect", path)
        _, idoc, err4 = run(monkeypatch, capsys, "inspect", "--json", path)
        _, _, err5 = run(monkeypatch, capsys, "decode", "--format", "nonsense", path)
    assert code == (1 if damaged else 0)
    if damaged:
        assert "=" in json.loads(doc)["reads"][0]["text"][:8]        # the digit did turn into '='
    for text in (table, report, err1, err2, err3, err4, err5,
                 _json_strings(json.loads(doc)), _json_strings(json.loads(idoc))):
        assert PAN not in text
        assert _leaks(text) == []


@pytest.mark.parametrize("damaged", [False, True])
def test_no_plot_text_shows_hidden_account_digits(captures, damaged):
    _, cap = captures[damaged]
    fig, _ = report_figure(inspect_capture(cap), title="card")
    texts = " ".join(t.get_text() for t in fig.findobj(matplotlib.text.Text))
    assert PAN not in texts and _leaks(texts) == []


def test_masked_characters_get_no_bit_values_in_the_plot(captures):
    _, cap = captures[False]
    reports = inspect_capture(cap)

    def bit_labels(unmask: bool) -> int:
        fig, _ = report_figure(reports, unmask=unmask)
        return sum(t.get_text() in ("0", "1") for t in fig.findobj(matplotlib.text.Text))

    # the start-sentinel zoom holds account characters: unmasked, their bits are labelled
    assert bit_labels(False) < bit_labels(True)


def test_the_unmasked_outputs_do_show_the_account_number(monkeypatch, capsys, captures):
    path, _ = captures[False]
    _, doc, _ = run(monkeypatch, capsys, "decode", "--json", "--unmask", path)
    assert json.loads(doc)["reads"][0]["text"] == TEXT


@pytest.mark.parametrize("damaged", [False, True])
def test_plots_draw_no_pulse_or_interval_inside_a_masked_character(captures, damaged):
    # the times of pulses and intervals under a character spell out its bits (a half-cell
    # interval is a 1) as surely as a bit label does, in a vector file most of all
    import matplotlib.lines

    from readchan.formats.iso7813 import mask_text
    from readchan.report.plot import masked_spans

    _, cap = captures[damaged]
    reports = inspect_capture(cap)
    (ch,) = reports
    (r,) = ch.reads
    spans = masked_spans(r, mask_text(r.read.frame.text, r.read.frame.format, False, trusted=r.read.valid))
    assert spans.size and (spans[:, 1] > spans[:, 0]).all()

    def drawn_inside(unmask: bool) -> int:
        fig, _ = report_figure(reports, unmask=unmask)
        count = 0
        for line in fig.findobj(matplotlib.lines.Line2D):
            x = np.asarray(line.get_xdata(), float)
            y = np.asarray(line.get_ydata(), float)
            if x.size < 3 or x.size != y.size:          # axis lines and cell-boundary rules
                continue
            if line.get_label() == "speed (sliding fit)":
                continue        # a fit over many bits: no single bit shows in it
            inside = np.zeros(x.size, bool)
            for a, b in spans:
                inside |= (x > a) & (x < b)
            count += int(np.count_nonzero(inside & np.isfinite(y)))
        return count

    assert drawn_inside(False) == 0
    assert drawn_inside(True) > 100          # the same spans are drawn when unmasked
