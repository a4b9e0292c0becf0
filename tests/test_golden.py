"""Golden outputs: the decoder's answers on the fixtures and on 220 seeded synthesized captures
are what they were when recorded (``python scripts/golden.py record``).

A change to the package's shape must leave these identical; a change of behaviour re-records
them in the same commit, saying why.  A key added to a read is allowed.
"""

from __future__ import annotations

import importlib.util
import json
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
spec = importlib.util.spec_from_file_location("golden", ROOT / "scripts" / "golden.py")
golden = importlib.util.module_from_spec(spec)
spec.loader.exec_module(golden)


def test_golden_set_covers_every_fixture_and_at_least_200_synthesized_captures():
    data = json.loads(golden.GOLDEN.read_text())
    assert sorted(data["fixtures"]) == [p.name for p in golden.fixtures()]
    assert len(data["cases"]) >= 200
    drawn = {k for c in data["cases"] for k, v in c["impairments"].items() if v}
    assert drawn >= {"density_error", "jitter", "snr_db", "hum_level", "wander_level", "dc_offset",
                     "highpass_hz", "clip", "invert", "reverse"}


def test_decoder_gives_the_recorded_answers():
    diffs = golden.check(golden.GOLDEN)
    assert not diffs, "\n".join(diffs[:20])


def test_comparison_sees_a_changed_value_and_a_lost_key_but_allows_a_new_key():
    rec = {"reads": [{"text": "%A?", "valid": True, "start_s": 0.5}]}
    assert golden.differences(rec, {"reads": [{"text": "%A?", "valid": True, "start_s": 0.5, "new": 1}]}) == []
    assert golden.differences(rec, {"reads": [{"text": "%B?", "valid": True, "start_s": 0.5}]})
    assert golden.differences(rec, {"reads": [{"text": "%A?", "start_s": 0.5}]})
    assert golden.differences(rec, {"reads": []})
    assert golden.differences(rec, {"reads": [{"text": "%A?", "valid": True, "start_s": 0.5001}]})
    assert golden.differences(rec, {"reads": [{"text": "%A?", "valid": True, "start_s": 0.500001}]}) == []


def test_comparison_holds_in_any_checkout_but_sees_a_changed_file_name():
    rec = {"reads": [{"source": "/one/checkout/fixtures/a.wav", "text": "%A?"}]}
    moved = {"reads": [{"source": "/another/place/fixtures/a.wav", "text": "%A?"}]}
    renamed = {"reads": [{"source": "/one/checkout/fixtures/b.wav", "text": "%A?"}]}
    assert golden.differences(golden._portable(rec), golden._portable(moved)) == []
    assert golden.differences(golden._portable(rec), golden._portable(renamed))


def test_every_recorded_tape_capture_is_read_by_its_own_family_only():
    data = json.loads(golden.TAPE_GOLDEN.read_text())
    assert len(data["cases"]) >= 40
    family = {"ltc": "timecode", "kcs": "cassette"}
    for case in data["cases"]:
        rec = data["tape"][case["id"]]
        assert rec["families"] == [family[case["format"]]], case["id"]
        assert [r["format"] for r in rec["reads"]] == [case["format"]], case["id"]


def test_tape_decoder_gives_the_recorded_answers():
    rec = json.loads(golden.TAPE_GOLDEN.read_text())
    diffs = [d for case in rec["cases"]
             for d in golden.differences(rec["tape"][case["id"]], golden.decode_tape(case), case["id"])]
    assert not diffs, "\n".join(diffs[:20])
