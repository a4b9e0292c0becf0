"""One exception family for readchan, and the exit codes the CLI maps them to.

Exit codes (documented in the README):

====  =========================================================
0     every read found is valid (all parity bits and LRC good)
1     data was found, but at least one read is not valid
2     bad input or usage (unreadable file, bad parameter, ...)
3     no data found in any capture
4     internal error (a bug: please report it)
141   standard output was closed early (``readchan decode ... | head``):
      the remaining output is dropped quietly, as 128 + SIGPIPE
====  =========================================================
"""

from __future__ import annotations

EXIT_VALID = 0
EXIT_INVALID = 1
EXIT_BAD_INPUT = 2
EXIT_NO_DATA = 3
EXIT_INTERNAL = 4
EXIT_PIPE_CLOSED = 141


class ReadchanError(Exception):
    """Base of every error readchan raises on purpose; its message is one line for the user."""

    exit_code = EXIT_BAD_INPUT


class CaptureError(ReadchanError):
    """A capture file is missing, empty, truncated, of the wrong shape or holds NaN/Inf."""


class FormatError(ReadchanError):
    """An unknown or ill-formed character format, or text that a format cannot encode."""


class ParameterError(ReadchanError):
    """A parameter is out of its physical or practical range."""


class OutputError(ReadchanError):
    """An output file cannot be written: it exists (without force), is not a regular file,
    or its directory is missing, full or refuses new files."""
