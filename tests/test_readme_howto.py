"""The README's "How it works" worked example (registering a custom F2F card format) runs and
prints what its comment says."""

from __future__ import annotations

import re
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]


def _how_it_works_blocks() -> list[str]:
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    section = re.search(r"^## How it works[^\n]*\n(.*?)^### ", text, re.S | re.M).group(1)
    return re.findall(r"^```python\n(.*?)^```", section, re.S | re.M)


def test_the_custom_format_example_decodes_its_pass_and_leaves_the_registry_as_it_was(monkeypatch, capsys):
    from readchan.formats import registry

    before = [f.name for f in registry.all_formats()]
    (block,) = _how_it_works_blocks()
    monkeypatch.chdir(ROOT)
    exec(compile(block, "README.md how-it-works example", "exec"), {"__name__": "readme"})
    assert capsys.readouterr().out == "depot-pass True ;=2417=0086=?\n"
    assert [f.name for f in registry.all_formats()] == before
