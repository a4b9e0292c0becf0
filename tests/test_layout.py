"""The package's layout rules (the project's own: README, *How it works*): every stage module
opens with a docstring naming its input and output; no module over 400 lines; no function over
60 lines without a comment in it saying why it stays whole."""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

PACKAGE = Path(__file__).resolve().parents[1] / "readchan"
STAGE_PACKAGES = ("io", "frontend", "linecode", "formats", "measure", "report", "synth", "evaluate")
STAGE_MODULES = ("channel.py", "results.py", "stream.py", "batch.py")
MAX_MODULE_LINES = 400
MAX_FUNCTION_LINES = 60
MODULES = sorted(p for p in PACKAGE.rglob("*.py") if p.name != "__main__.py")


def _name(p: Path) -> str:
    return str(p.relative_to(PACKAGE.parent))


def _is_stage(p: Path) -> bool:
    rel = p.relative_to(PACKAGE).parts
    return p.name != "__init__.py" and (rel[0] in STAGE_PACKAGES or (len(rel) == 1 and rel[0] in STAGE_MODULES))


@pytest.mark.parametrize("path", MODULES, ids=_name)
def test_every_module_opens_with_a_docstring(path):
    assert ast.get_docstring(ast.parse(path.read_text(encoding="utf-8")))


@pytest.mark.parametrize("path", [p for p in MODULES if _is_stage(p)], ids=_name)
def test_every_stage_module_names_its_input_and_output(path):
    doc = ast.get_docstring(ast.parse(path.read_text(encoding="utf-8"))).lower()
    assert "input" in doc and "output" in doc


@pytest.mark.parametrize("path", MODULES, ids=_name)
def test_no_module_is_over_400_lines(path):
    assert path.read_text(encoding="utf-8").count("\n") <= MAX_MODULE_LINES


@pytest.mark.parametrize("path", MODULES, ids=_name)
def test_a_function_over_60_lines_says_why_in_a_comment(path):
    lines = path.read_text(encoding="utf-8").splitlines()
    tree = ast.parse("\n".join(lines))
    long = []
    for node in ast.walk(tree):
        if isinstance(node, (ast.FunctionDef, ast.AsyncFunctionDef)):
            first = min([node.lineno] + [d.lineno for d in node.decorator_list])
            if node.end_lineno - first + 1 > MAX_FUNCTION_LINES:
                around = lines[max(0, first - 4):node.end_lineno]
                if not any("60 lines" in ln for ln in around if ln.lstrip().startswith("#")):
                    long.append(f"{node.name} ({node.end_lineno - first + 1} lines)")
    assert not long
