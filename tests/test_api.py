"""The public API in ``readchan/__init__.py``: each entry point gives what the function behind it
gives, errors name the parameter, the README's Python examples run, and the import is cheap."""

from __future__ import annotations

import importlib
import re
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

import readchan
from readchan.io.capture import load_capture
from readchan.channel import DecodeSettings, decode_capture
from readchan.measure.diagnose import inspect_capture
from readchan.report.render import read_dict, reads_of
from readchan.synth import SpeedProfile, SynthSpec
from readchan.synth import synthesize as synth_synthesize
from readchan.synth.card import track_content

ROOT = Path(__file__).resolve().parents[1]
FIXTURES = ROOT / "fixtures"
SWIPE = FIXTURES / "three-track-swipe.wav"
SCOPE = FIXTURES / "track2-scope.csv"


def _reads(results):
    return [read_dict(r, unmask=True) for r in reads_of(results)]


def test_load_gives_the_capture_load_capture_gives():
    a, b = readchan.load(SWIPE), load_capture(SWIPE)
    assert isinstance(a, readchan.Capture)
    assert a.rate_hz == b.rate_hz and np.array_equal(a.samples, b.samples)


def test_decode_of_a_path_equals_decode_capture_of_the_loaded_capture():
    assert _reads(readchan.decode(SWIPE)) == _reads(decode_capture(load_capture(SWIPE)))


def test_decode_takes_a_capture_settings_and_channels():
    settings = DecodeSettings(track=2)
    cap = load_capture(SWIPE)
    got = readchan.decode(cap, settings, channels=[1])
    assert [c.channel for c in got] == [1]
    assert _reads(got) == _reads(decode_capture(cap, settings, channels=[1]))


def test_inspect_gives_the_report_inspect_capture_gives():
    (api,) = readchan.inspect(SCOPE)
    (direct,) = inspect_capture(load_capture(SCOPE))
    assert isinstance(api, readchan.ChannelReport)
    assert api.front_end == direct.front_end
    assert [r.checks for r in api.reads] == [r.checks for r in direct.reads]


def test_synthesize_gives_the_samples_synth_synthesize_gives():
    spec = SynthSpec(tracks=(track_content(";12345?", track=2),), speed=SpeedProfile(mean_cm_s=50.0), seed=3)
    api = readchan.synthesize(spec)
    assert isinstance(api, readchan.SynthResult)
    assert np.array_equal(api.samples, synth_synthesize(spec).samples)


def test_synthesize_passes_max_samples_and_the_error_names_it():
    spec = SynthSpec(tracks=(track_content(";12345?", track=2),), seed=3)
    with pytest.raises(readchan.ParameterError, match="max_samples=None") as excinfo:
        readchan.synthesize(spec, max_samples=100)
    assert "--" not in str(excinfo.value)


def test_a_table_without_rate_names_the_rate_hz_parameter(tmp_path):
    path = tmp_path / "one-column.csv"
    path.write_text("\n".join(str(v) for v in np.sin(np.arange(200) / 5.0)) + "\n")
    with pytest.raises(readchan.CaptureError, match=r"pass rate_hz\b") as excinfo:
        readchan.decode(path)
    assert "--rate-hz" not in str(excinfo.value)


def test_the_cli_spells_the_same_error_as_its_option():
    from readchan.cli.main import cli_spelling

    assert cli_spelling("x.csv has no time column; pass rate_hz to give the sample rate").endswith(
        "pass --rate-hz to give the sample rate")
    assert cli_spelling("out.wav exists; pass force=True to overwrite") == "out.wav exists; pass --force to overwrite"
    assert cli_spelling("rate_hz must be positive") == "rate_hz must be positive"


def test_wrong_argument_types_name_the_parameter():
    with pytest.raises(readchan.ParameterError, match="path_or_capture"):
        readchan.decode(42)
    with pytest.raises(readchan.ParameterError, match="settings"):
        readchan.decode(SWIPE, {"track": 2})
    with pytest.raises(readchan.ParameterError, match="rate_hz"):
        readchan.inspect(load_capture(SWIPE), rate_hz=48_000.0)
    with pytest.raises(readchan.ParameterError, match="spec"):
        readchan.synthesize("%HELLO?")


def test_the_api_functions_keep_their_names_when_every_submodule_is_imported():
    import pkgutil

    for info in pkgutil.walk_packages(readchan.__path__, "readchan."):
        if info.name != "readchan.__main__":
            importlib.import_module(info.name)
    for name in ("load", "decode", "inspect", "synthesize"):
        assert callable(getattr(readchan, name)) and getattr(readchan, name).__module__ == "readchan"


def _readme_python_blocks() -> list[str]:
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    section = re.search(r"^### From Python\n(.*?)^#{2,3} ", text, re.S | re.M).group(1)
    return re.findall(r"^```python\n(.*?)^```", section, re.S | re.M)


def test_readme_python_section_has_examples_of_every_entry_point():
    code = "\n".join(_readme_python_blocks())
    for name in ("readchan.load(", "readchan.decode(", "readchan.inspect(", "readchan.synthesize(", "readchan.decode_many("):
        assert name in code


# what each example must print: the three tracks valid; a masked account number; a valid synthetic read;
# the fixtures folder's 7 captures and 10 reads, then a good capture's and a missing one's errors; a batch over
# a thread pool in input order
README_OUTPUTS = [r"\A(\d forward True [\d.]+ cm/s worst margin [\d.]+\n){3}\Z", r"\A;\d{6}\*+\d{4}=", r"\[True\]\n\Z",
                  r"\A7 10\n\[None, 'missing.wav: no such file'\]\n\Z",
                  r"\Afixtures/three-track-swipe.wav 0 \[True, True, True\]\nfixtures/track2-strobe.vcd 0 \[True\]\n\Z"]


@pytest.mark.parametrize("index", range(len(README_OUTPUTS)))
def test_readme_python_example_runs_and_prints_what_it_says(index, monkeypatch, capsys):
    blocks = _readme_python_blocks()
    assert len(blocks) == len(README_OUTPUTS)
    monkeypatch.chdir(ROOT)
    exec(compile(blocks[index], f"README.md python example {index + 1}", "exec"), {"__name__": "readme"})
    assert re.search(README_OUTPUTS[index], capsys.readouterr().out)


def test_import_readchan_loads_no_numerical_library():
    code = "import sys, readchan; print(sorted(m for m in ('numpy', 'scipy', 'matplotlib') if m in sys.modules))"
    out = subprocess.run([sys.executable, "-c", code], cwd=ROOT, capture_output=True, text=True, check=True).stdout
    assert out.strip() == "[]"
