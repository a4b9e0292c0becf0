"""Writing output files safely: one atomic writer for captures, plots and sweep curves.

Input: a target path and the bytes or file a caller writes to a temporary path.
Output: the target file, complete, or no change at all.

Every file readchan writes goes through :func:`atomic_output`, which makes these rules hold
everywhere:

* The data go to a hidden temporary file beside the target (same directory, so the same file
  system) which is renamed into place only when complete: a failure never leaves half a file
  behind nor destroys an existing one.
* An existing file is replaced only with ``force``; without it, the final step is a hard link
  that fails if the target appeared in the meantime.
* Only a regular file, or a symbolic link to one, is ever replaced, with or without ``force``:
  a device node, a FIFO, a socket or a directory is refused (as root, ``/dev/null`` would
  otherwise become a regular file).  Through a symbolic link, the file it points to gets the
  new content and the link stays; a link to nothing is refused.
* The new file is created with mode 0666 less the user's umask, as a shell redirection would be.
* SIGTERM and SIGHUP while a temporary file exists remove it, then take their previous course
  (the default ends the process with the signal's usual status).
* Every failure is one :class:`~readchan.errors.OutputError` line (exit code 2) naming the path.
"""

from __future__ import annotations

import os
import secrets
import signal
import stat
import threading
from contextlib import contextmanager
from pathlib import Path
from typing import Callable, Iterator

from readchan.errors import OutputError, ReadchanError

__all__ = ["atomic_output", "check_output_path", "check_path_length"]
_SIGNALS = tuple(getattr(signal, n) for n in ("SIGTERM", "SIGHUP") if hasattr(signal, n))

ErrorType = Callable[[str], ReadchanError]


def _one_line(text: str) -> str:
    return " ".join(str(text).split())


def _fail(error: ErrorType, source: str, problem: str) -> ReadchanError:
    from readchan.io.checks import display_path     # bytes that are not UTF-8 shown as escapes

    return error(_one_line(f"{display_path(source)}: {problem}"))


def _name_limits(directory: Path) -> tuple[int, int]:
    """(NAME_MAX, PATH_MAX) of the file system holding ``directory`` (255 and 4096 if unknown)."""
    limits = []
    for key, default in (("PC_NAME_MAX", 255), ("PC_PATH_MAX", 4096)):
        try:
            value = os.pathconf(directory, key)
        except (OSError, ValueError, AttributeError):
            value = -1
        limits.append(value if value and value > 0 else default)
    return limits[0], limits[1]


def check_path_length(path: str | os.PathLike, *, error: ErrorType = OutputError) -> None:
    """Raise ``error`` unless each component of ``path`` is within the file system's name limit
    (``NAME_MAX``, 255 bytes on most) and the whole within ``PATH_MAX``."""
    from readchan.io.checks import display_path

    target = Path(path)
    shown = display_path(path)
    parent = target.parent if str(target.parent) else Path(".")
    name_max, path_max = _name_limits(parent if parent.is_dir() else Path("."))
    for part in target.parts:
        size = len(os.fsencode(part))
        if size > name_max:
            raise error(f"{shown[:60]}...: a name in the path is too long ({size} bytes; the file system "
                        f"allows {name_max})")
    size = len(os.fsencode(os.path.abspath(target)))
    if size >= path_max:
        raise error(f"{shown[:60]}...: the path is too long ({size} bytes; the system allows {path_max - 1})")


def _reason(exc: OSError) -> str:
    return exc.strerror or str(exc)


def check_output_path(path: str | os.PathLike, *, force: bool = False, error: ErrorType = OutputError,
                      probe: bool = False) -> Path:
    """Check that ``path`` can take a new file; return the file that will be written.

    The returned path is ``path`` itself, or for a symbolic link the regular file it points to.

    Parameters
    ----------
    path : target file.
    force : allow replacing an existing regular file.
    error : exception type raised (a :class:`~readchan.errors.ReadchanError` subclass).
    probe : also create and remove a temporary file in the directory, to find out before a
        long computation whether the directory takes files at all.

    Raises
    ------
    ``error``
        For a directory, a device, FIFO or socket, a dangling link, a missing or unusable
        directory, a name too long for the file system, or an existing file without ``force``.
    """
    source = os.fsdecode(os.fspath(path))
    target = Path(path)
    check_path_length(target, error=error)
    try:
        st = os.lstat(target)
    except FileNotFoundError:
        st = None
    except OSError as exc:
        raise _fail(error, source, f"cannot be written ({_reason(exc)})") from None
    if st is not None and stat.S_ISLNK(st.st_mode):
        try:
            st = os.stat(target)
        except FileNotFoundError:
            raise _fail(error, source, "is a symbolic link to nothing; refusing to write through it") from None
        except OSError as exc:
            raise _fail(error, source, f"cannot be followed ({_reason(exc)})") from None
        target = Path(os.path.realpath(target))
    if st is not None:
        if stat.S_ISDIR(st.st_mode):
            raise _fail(error, source, "is a directory")
        if not stat.S_ISREG(st.st_mode):
            raise _fail(error, source, f"is a {_file_type(st.st_mode)}, not a regular file; "
                                       f"refusing to replace it (with or without force=True)")
        if not force:
            raise _fail(error, source, "exists; pass force=True to overwrite")
    parent = target.parent
    if not parent.is_dir():
        raise _fail(error, source, f"directory {str(parent)!r} does not exist")
    if probe:
        tmp = _make_temp(parent, target.name, source, error)
        _discard(tmp)
    return target


def _file_type(mode: int) -> str:
    if stat.S_ISCHR(mode):
        return "character device"
    if stat.S_ISBLK(mode):
        return "block device"
    if stat.S_ISFIFO(mode):
        return "FIFO (named pipe)"
    if stat.S_ISSOCK(mode):
        return "socket"
    return "special file"


@contextmanager
def atomic_output(path: str | os.PathLike, *, force: bool = False,
                  error: ErrorType = OutputError) -> Iterator[Path]:
    """Context manager: yields a temporary path to write; on success it becomes ``path``.

    The body writes the whole file to the yielded path (by name: any library that writes a
    file will do).  When the body ends normally the file is flushed to disk and renamed into
    place; when it raises, or SIGTERM/SIGHUP arrives, the temporary file is removed and the
    target is untouched.  An ``OSError`` from the body (disk full, ...) becomes ``error``.

    Examples
    --------
    >>> with atomic_output("out.csv", force=True) as tmp:      # doctest: +SKIP
    ...     tmp.write_text("time_s,v\\n0,1\\n")
    """
    source = os.fsdecode(os.fspath(path))
    target = check_output_path(path, force=force, error=error)
    tmp = _make_temp(target.parent, target.name, source, error)
    try:
        try:
            yield tmp
            _flush(tmp)
            _commit(tmp, target, force, source, error)
        except OSError as exc:
            raise _fail(error, source, f"cannot write file ({_reason(exc)})") from None
    finally:
        _discard(tmp)


def _temp_name(parent: Path, name: str, tag: str) -> str:
    """``.<name>.<tag>.tmp``, the name shortened so the whole stays within NAME_MAX."""
    name_max, _ = _name_limits(parent)
    room = name_max - len(os.fsencode(f"..{tag}.tmp"))
    raw = os.fsencode(name)[:max(room, 1)]
    return f".{os.fsdecode(raw)}.{tag}.tmp"


def _make_temp(parent: Path, name: str, source: str, error: ErrorType) -> Path:
    for _ in range(100):
        tmp = parent / _temp_name(parent, name, secrets.token_hex(4))
        _register(tmp)
        try:
            fd = os.open(tmp, os.O_CREAT | os.O_EXCL | os.O_WRONLY | getattr(os, "O_CLOEXEC", 0), 0o666)
        except FileExistsError:
            _unregister(tmp)
            continue
        except OSError as exc:
            _unregister(tmp)
            raise _fail(error, source, f"cannot create a file in {str(parent)!r} ({_reason(exc)})") from None
        os.close(fd)
        return tmp
    raise _fail(error, source, f"cannot create a temporary file in {str(parent)!r}")


def _flush(tmp: Path) -> None:
    """Push the finished file to the disk before it takes the target's name."""
    fd = os.open(tmp, os.O_RDONLY)
    try:
        os.fsync(fd)
    finally:
        os.close(fd)


def _commit(tmp: Path, target: Path, force: bool, source: str, error: ErrorType) -> None:
    """Move the finished temporary file into place; never replace a file unless forced,
    and never anything but a regular file."""
    if force:
        try:
            st = os.lstat(target)
        except FileNotFoundError:
            st = None
        if st is not None and not stat.S_ISREG(st.st_mode):   # swapped in since the check
            raise _fail(error, source, f"is a {_file_type(st.st_mode)}, not a regular file; "
                                       f"refusing to replace it")
        os.replace(tmp, target)
        return
    try:
        os.link(tmp, target)           # fails if the target appeared meanwhile
    except FileExistsError:
        raise _fail(error, source, "exists; pass force=True to overwrite") from None
    except OSError:
        if os.path.lexists(target):    # file systems without hard links
            raise _fail(error, source, "exists; pass force=True to overwrite") from None
        os.replace(tmp, target)


def _discard(tmp: Path) -> None:
    try:
        os.unlink(tmp)
    except OSError:
        pass
    _unregister(tmp)


# --------------------------------------------------------------------------- signals
# Temporary files alive now, and the handlers that were in place before ours.

_live: set[str] = set()
_previous: dict[int, object] = {}
_lock = threading.Lock()


def _register(tmp: Path) -> None:
    with _lock:
        _live.add(os.fspath(tmp))
        if len(_live) == 1:
            _install()


def _unregister(tmp: Path) -> None:
    with _lock:
        _live.discard(os.fspath(tmp))
        if not _live:
            _restore()


def _install() -> None:
    if threading.current_thread() is not threading.main_thread():
        return                         # only the main thread may set handlers
    for sig in _SIGNALS:
        try:
            prev = signal.getsignal(sig)
            if prev == signal.SIG_IGN:  # nohup and the like: the signal will not end us
                continue
            signal.signal(sig, _on_signal)
            _previous[sig] = prev
        except (ValueError, OSError):
            pass


def _restore() -> None:
    for sig, prev in list(_previous.items()):
        try:
            signal.signal(sig, prev if prev is not None else signal.SIG_DFL)
        except (ValueError, OSError, TypeError):
            pass
        _previous.pop(sig, None)


def _on_signal(signum, frame) -> None:
    """Remove the temporary files, put the earlier handlers back, and let the signal act."""
    for p in list(_live):
        try:
            os.unlink(p)
        except OSError:
            pass
    _live.clear()
    prev = _previous.get(signum)
    _restore()
    if callable(prev):
        prev(signum, frame)
    else:                              # SIG_DFL (or set outside Python): the usual ending
        os.kill(os.getpid(), signum)
