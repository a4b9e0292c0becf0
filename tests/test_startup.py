"""Start-up: the CLI imports only what a command needs (no timing here: the figure is measured as
the README's *Start-up* section says)."""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]


def _loaded_after(statement: str, modules: tuple[str, ...]) -> list[str]:
    code = f"import sys\n{statement}\nsys.stderr.write('loaded: ' + ' '.join(m for m in {modules!r} if m in sys.modules))"
    err = subprocess.run([sys.executable, "-c", code], cwd=ROOT, capture_output=True, text=True, check=True).stderr
    return err.rsplit("loaded:", 1)[1].split()


def test_importing_the_cli_loads_no_numerical_or_plotting_library():
    assert _loaded_after("import readchan.cli.main", ("matplotlib", "numpy", "scipy", "soundfile", "readchan.measure.diagnose")) == []


def test_cli_help_loads_no_plotting_library():
    statement = ("sys.argv = ['readchan', '--help']\nimport readchan.cli.main as c\n"
                 "try:\n    c.main()\nexcept SystemExit:\n    pass")
    assert _loaded_after(statement, ("matplotlib",)) == []
