"""Where a batch's captures come from: paths, directories, globs and standard input.

Input: what the user named (``readchan decode A.wav dir/ 'runs/*.flac' -``, or the ``paths``
of :func:`readchan.decode_many`).
Output: the captures to decode, in the order named: a path (``str``), or :class:`Stdin` holding
the bytes read from standard input.

* A directory stands for every capture file below it (recursively), by extension
  (:data:`CAPTURE_SUFFIXES`), in sorted path order; hidden files and directories are skipped.
  A directory holding none stays as it is, so that its decode reports that.
* A name that is no file but holds ``*``, ``?`` or ``[`` is a glob (``**`` reaches into
  subdirectories), expanded in sorted order; one that matches nothing stays as it is.
* ``-`` is standard input: a WAV/FLAC/AIFF capture when it starts with an audio container's
  magic bytes, a VCD when it starts with a VCD declaration, a text table otherwise.
"""

from __future__ import annotations

import glob
import os
import tempfile
from contextlib import contextmanager
from dataclasses import dataclass
from pathlib import Path
from typing import Iterable, Iterator

CAPTURE_SUFFIXES = (".wav", ".wave", ".flac", ".aif", ".aiff", ".aifc", ".ogg", ".csv", ".txt", ".tsv", ".dat",
                    ".asc", ".vcd")
"""Extensions a directory's capture files have (audio, text tables, VCD)."""

STDIN_NAME = "<stdin>"
"""The ``source`` of a capture read from standard input."""

_AUDIO_MAGIC = {b"RIFF": ".wav", b"RIFX": ".wav", b"RF64": ".wav", b"FORM": ".aiff", b"fLaC": ".flac",
                b"OggS": ".ogg"}


@dataclass(frozen=True)
class Stdin:
    """A capture read from standard input: its bytes."""

    data: bytes

    def __str__(self) -> str:
        return STDIN_NAME


def _is_glob(name: str) -> bool:
    return any(c in name for c in "*?[")


def _below(directory: Path) -> list[str]:
    found = []
    for root, dirs, files in os.walk(directory):
        dirs[:] = sorted(d for d in dirs if not d.startswith("."))
        found += [os.path.join(root, f) for f in files
                  if not f.startswith(".") and os.path.splitext(f)[1].lower() in CAPTURE_SUFFIXES]
    return sorted(found)


def expand_sources(names: Iterable[str | os.PathLike | Stdin], *, stdin=None) -> list[str | Stdin]:
    """The captures ``names`` stand for, in order (see the module docstring).  ``-`` reads
    ``stdin`` (a binary stream; default ``sys.stdin.buffer``) once; a second ``-`` is refused."""
    from readchan.errors import ParameterError

    out: list[str | Stdin] = []
    seen_stdin = False
    for item in names:
        if isinstance(item, Stdin):
            out.append(item)
            continue
        name = os.fspath(item)
        name = os.fsdecode(name) if isinstance(name, bytes) else name
        if name == "-":
            if seen_stdin:
                raise ParameterError("standard input (-) can be read only once in a batch")
            seen_stdin = True
            out.append(Stdin(_read_stdin(stdin)))
        elif os.path.isdir(name):
            out += _below(Path(name)) or [name]
        elif not os.path.lexists(name) and _is_glob(name):
            out += sorted(glob.glob(name, recursive=True)) or [name]
        else:
            out.append(name)
    return out


def _read_stdin(stream) -> bytes:
    import sys

    stream = stream if stream is not None else getattr(sys.stdin, "buffer", sys.stdin)
    data = stream.read()
    return data.encode() if isinstance(data, str) else bytes(data)


def stdin_suffix(data: bytes) -> str:
    """The file extension standard input's bytes are read as: audio by its container's magic
    bytes, ``.vcd`` for a VCD declaration, ``.csv`` otherwise."""
    from readchan.io.vcd import VCD_KEYWORDS

    for magic, suffix in _AUDIO_MAGIC.items():
        if data.startswith(magic):
            return suffix
    return ".vcd" if data.lstrip().startswith(VCD_KEYWORDS) else ".csv"


@contextmanager
def stdin_file(src: Stdin) -> Iterator[Path]:
    """A temporary file holding ``src``'s bytes, named by their kind (:func:`stdin_suffix`);
    removed on exit."""
    fd, name = tempfile.mkstemp(prefix="readchan-stdin-", suffix=stdin_suffix(src.data))
    try:
        with os.fdopen(fd, "wb") as fh:
            fh.write(src.data)
        yield Path(name)
    finally:
        try:
            os.unlink(name)
        except OSError:
            pass
