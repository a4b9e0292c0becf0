"""The command line: parse, call the library, render.  Exit codes are mapped here, once.

Exit codes: 0 every read valid; 1 data found, not all valid; 2 bad input or usage;
3 no data found; 4 internal error (a bug: please report it); 141 standard output closed
early (``readchan decode ... | head``), the rest of the output dropped quietly.

Vocabulary (the same in every command): units in option names (``--rate-hz``,
``--speed-cm-s``); ``--signal`` is the kind of signal a file holds, ``--file-type`` the kind
of file written; ``--head-gap-um`` is the head's gap, ``--pause-s`` the time between swipes.
Old spellings (``--rate``, ``--kind``, ``--gap-um``, ``--gap-s``, sweep's ``snr_db``...) are
hidden options that still work for one release, with a one-line deprecation warning.
"""

from __future__ import annotations

import os
import re
import sys
import warnings

import typer

# The commands register themselves on ``app`` when imported, in the order ``--help`` lists them.
from readchan.cli import decode  # noqa: F401,I001
from readchan.cli import synth  # noqa: F401,I001
from readchan.cli import inspect  # noqa: F401,I001
from readchan.cli import sweep  # noqa: F401,I001
from readchan.cli.common import _StdoutClosed, _show_warning, app, err
from readchan.errors import EXIT_BAD_INPUT, EXIT_INTERNAL, EXIT_PIPE_CLOSED, ReadchanError

__all__ = ["app", "main", "cli_spelling"]


def main() -> None:
    """Console entry point: run the app and map errors to one-line messages and exit codes.

    Python warnings become one line each (``readchan: warning: ...``); a closed standard
    output ends the run quietly with exit code 141.
    """
    with warnings.catch_warnings():
        warnings.showwarning = _show_warning
        try:
            code = _run()
            sys.stdout.flush()
        except (_StdoutClosed, BrokenPipeError):
            code = _stdout_closed()
    sys.exit(code)


def _stdout_closed() -> int:
    """The reader of our standard output has gone: drop what is left, quietly.

    As the Python documentation advises (signal module, "Note on SIGPIPE"), standard output is
    pointed at the null device so that the interpreter's last flush cannot fail again."""
    devnull = os.open(os.devnull, os.O_WRONLY)
    try:
        os.dup2(devnull, sys.stdout.fileno())
    except (AttributeError, OSError, ValueError):      # not a real file (embedded, tests)
        sys.stdout = open(os.devnull, "w")
    finally:
        os.close(devnull)
    return EXIT_PIPE_CLOSED


# The library's errors name its parameters; on the command line they read as the options.
_CLI_SPELLINGS = (("force=True", "--force"), ("max_samples=None", "--force"), ("rate_hz", "--rate-hz"))
_LIBRARY_NAME = re.compile(r"\b(pass|without) (" + "|".join(re.escape(a) for a, _ in _CLI_SPELLINGS) + r")(?![\w=])")


def cli_spelling(message: str) -> str:
    """``message`` with the library parameter it tells the user to pass (``pass rate_hz``,
    ``pass force=True``) spelt as the command-line option (``pass --rate-hz``)."""
    flags = dict(_CLI_SPELLINGS)
    return _LIBRARY_NAME.sub(lambda m: f"{m.group(1)} {flags[m.group(2)]}", message)


def _run() -> int:
    try:
        rv = app(standalone_mode=False)
        return rv if isinstance(rv, int) else 0
    except typer.Exit as e:
        return e.exit_code
    except _StdoutClosed:
        raise
    except ReadchanError as e:
        err.print(f"readchan: error: {cli_spelling(str(e))}", highlight=False, markup=False)
        return e.exit_code
    except KeyboardInterrupt:
        return 130
    except Exception as e:  # click usage errors and anything unforeseen
        if hasattr(e, "format_message") and hasattr(e, "exit_code"):   # click/typer usage errors
            err.print(f"readchan: error: {e.format_message()}", highlight=False, markup=False)
            return EXIT_BAD_INPUT
        if type(e).__name__ == "Abort":
            return 130
        if os.environ.get("READCHAN_DEBUG"):
            raise
        err.print(f"readchan: internal error: {type(e).__name__}: {e} (set READCHAN_DEBUG=1 for details)",
                  highlight=False, markup=False)
        return EXIT_INTERNAL
