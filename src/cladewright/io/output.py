"""Internal: atomic writing behind every output (Tree.write, DistanceMatrix.write, render_tree, write_report).

Writing outputs atomically, so that a failed run never leaves a partial
file and never spoils one the user already had.

Only a regular file is written through a temporary file and a rename: a
symbolic link is followed to the file it names (the link stays), and a
device, FIFO, pipe, terminal or socket is written to directly, never
replaced. A name ending in ``.gz`` is written gzip-compressed (RFC 1952)."""

from __future__ import annotations

import contextlib
import errno
import gzip
import io
import os
import re
import stat
import sys
import tempfile
from collections.abc import Iterator
from typing import IO, Any

from ..errors import InputError

__all__ = ["write_text_atomic", "atomic_output", "output_error", "is_char_device"]

# errno values of a failed write that the user can fix (space, quota,
# permissions, a read-only file system, a file too large for it).
_OUTPUT_ERRNOS: dict[int | None, str] = {
    errno.ENOSPC: "the disk is full", errno.EDQUOT: "the disk quota is exceeded",
    errno.EACCES: "permission denied", errno.EPERM: "permission denied",
    errno.EROFS: "the file system is read-only", errno.EFBIG: "the file is too large for the file system"}
# Names of a process's own open files: written through the open file (as the
# shell does), not reopened, so that an append or a socket keeps working.
_FD_NAME = re.compile(r"/(?:dev/fd|proc/self/fd)/(\d+)|/dev/std(out|err)")
# As many symbolic links as Linux follows in one path (MAXSYMLINKS).
_MAX_LINKS = 40
_KINDS = ((stat.S_ISCHR, "character device"), (stat.S_ISBLK, "block device"), (stat.S_ISFIFO, "FIFO"),
          (stat.S_ISSOCK, "socket"))


def output_error(err: OSError, path: str | os.PathLike[str], tail: str = "nothing was written") -> InputError | None:
    """An :class:`InputError` for an OSError met while writing ``path``, or
    None when the error is not one the user can fix (then re-raise it).

    Parameters
    ----------
    err : OSError
    path : str or os.PathLike
        The output being written.
    tail : str
        What became of the output, closing the message (an appending writer
        says what it kept).

    Returns
    -------
    InputError or None
    """
    what = _OUTPUT_ERRNOS.get(getattr(err, "errno", None))
    if what is None:
        return None
    target = os.fspath(path)
    folder = os.path.dirname(os.path.abspath(target))
    if err.errno in (errno.ENOSPC, errno.EDQUOT, errno.EFBIG):
        fix = f"free space on the disk holding {folder} or choose another output folder"
    elif err.errno == errno.EROFS:
        fix = "choose an output folder on a writable disk"
    else:
        fix = f"check the permissions of {folder} or choose another output folder"
    return InputError(f"cannot write the output ({what}); {fix}; {tail}", source=target)


def _new_file_mode(target: str) -> int:
    """Permission bits for the output: the existing file's, else what the
    umask gives a new file (mkstemp's 0600 would hide outputs from others)."""
    try:
        return stat.S_IMODE(os.stat(target).st_mode)
    except OSError:
        pass
    try:
        # Linux reports the umask without changing it (thread-safe).
        with open("/proc/self/status", encoding="ascii") as fh:
            mask = next(int(x.split()[1], 8) for x in fh if x.startswith("Umask:"))
    except (OSError, StopIteration, ValueError, IndexError):
        mask = os.umask(0o022)
        os.umask(mask)
    return 0o666 & ~mask


def _fd_number(path: str) -> int | None:
    """The descriptor a name such as ``/dev/fd/3`` or ``/dev/stdout`` stands for, else None."""
    found = _FD_NAME.fullmatch(path)
    if found is None:
        return None
    if found.group(1) is not None:
        return int(found.group(1))
    return 1 if found.group(2) == "out" else 2


def _follow_links(target: str) -> str:
    """The path a chain of symbolic links starting at ``target`` ends at.

    Each link is read relative to its own folder, as the kernel does; the
    chain stops at a name of an open descriptor (``/dev/fd/N``), whose
    link text (``pipe:[…]``) is not a path.
    """
    path = target
    for _ in range(_MAX_LINKS):
        if _fd_number(path) is not None:
            return path
        try:
            link = os.readlink(path)
        except OSError:  # not a link, nothing there yet, or a folder that is missing
            return path
        path = os.path.join(os.path.dirname(path), link)
    raise InputError(f"the output is a chain of more than {_MAX_LINKS} symbolic links (a loop?); point the link "
                     "at a file or choose another output path", source=target)


def _target_kind(target: str, final: str) -> str | None:
    """What ``final`` (``target`` with its links followed) is: None for a
    regular file or a new one, else the kind of file written directly.

    Raises
    ------
    InputError
        For a folder, and for an existing regular file that is
        write-protected (no write bit for anyone, or access(2) says no).
    """
    number = _fd_number(final)
    if number is not None:
        return f"file descriptor {number}"
    try:
        info = os.stat(final)
    except OSError:  # a new file, or a path the writer below reports
        return None
    if stat.S_ISDIR(info.st_mode):
        raise InputError("the output is a folder; give a file name inside it", source=target)
    if stat.S_ISREG(info.st_mode):
        # root passes access(2) whatever the mode, so the mode bits are read too
        if stat.S_IMODE(info.st_mode) & 0o222 == 0 or not os.access(final, os.W_OK):
            via = f" (the symbolic link leads to {final})" if final != target else ""
            raise InputError(f"the output exists and is write-protected{via}; make it writable (chmod u+w) or "
                             "choose another output path; nothing was written", source=target)
        return None
    return next((name for test, name in _KINDS if test(info.st_mode)), "special file")


def is_char_device(path: str | os.PathLike[str]) -> bool:
    """Whether ``path`` (links followed) is a character device such as
    ``/dev/null`` or a terminal, which may be named as an input and an
    output, or as two outputs, without losing anything.

    Parameters
    ----------
    path : str or os.PathLike

    Returns
    -------
    bool
    """
    try:
        return stat.S_ISCHR(os.stat(path).st_mode)
    except (OSError, ValueError):
        return False


def _layers(raw: IO[bytes], mode: str, packed: bool) -> list[Any]:
    """The streams over the binary file ``raw``: gzip (RFC 1952) when
    ``packed``, with no file name and modification time 0 in its header so
    that identical runs give identical bytes; then UTF-8 text for mode "w"."""
    layers: list[Any] = [raw]
    if packed:
        layers.append(gzip.GzipFile(filename="", mode="wb", fileobj=raw, mtime=0))
    if "b" not in mode:
        layers.append(io.TextIOWrapper(layers[-1], encoding="utf-8", newline="\n"))
    return layers


def _finish(layers: list[Any]) -> None:
    """Push everything down to the bottom stream, which stays open: the
    text layer is flushed and the gzip layer closed (its trailer written)."""
    for layer in reversed(layers):
        if isinstance(layer, gzip.GzipFile):
            layer.close()
        else:
            layer.flush()


def _discard(layers: list[Any]) -> None:
    """Close every stream after a failure, quietly: the error that caused it is the one to report."""
    for layer in reversed(layers):
        with contextlib.suppress(Exception):
            layer.close()


def _open_direct(target: str, final: str, kind: str) -> IO[bytes]:
    """A binary file writing to ``final`` as it is: the open descriptor it
    names, a stream socket, or the device or FIFO opened for writing without
    creating or truncating anything."""
    number = _fd_number(final)
    try:
        if number is not None:
            if number in (1, 2):  # what Python has buffered for that descriptor goes first
                with contextlib.suppress(AttributeError, OSError, ValueError):
                    (sys.stdout if number == 1 else sys.stderr).flush()
            fd = os.dup(number)
        elif kind == "socket":
            import socket

            with socket.socket(socket.AF_UNIX, socket.SOCK_STREAM) as sock:
                sock.connect(final)
                fd = sock.detach()
        else:
            fd = os.open(final, os.O_WRONLY | getattr(os, "O_NOCTTY", 0) | getattr(os, "O_CLOEXEC", 0))
    except OSError as err:
        raise InputError(f"cannot open the output, a {kind}, for writing ({err.strerror or err}); check it or "
                         "choose another output path; nothing was written", source=target) from None
    return os.fdopen(fd, "wb")


@contextlib.contextmanager
def _direct_output(target: str, final: str, kind: str, mode: str, packed: bool) -> Iterator[IO[Any]]:
    """Write to a device, FIFO, pipe, terminal or socket directly: it is
    never replaced or removed, and an error is one line."""
    layers = _layers(_open_direct(target, final, kind), mode, packed)
    try:
        yield layers[-1]
        _finish(layers)
        layers[0].close()
    except OSError as err:
        _discard(layers)
        raise InputError(f"cannot write to the output, a {kind} ({err.strerror or err}); it is written directly, "
                         "so what went out before the error is incomplete; choose another output path",
                         source=target) from None
    except BaseException:
        _discard(layers)
        raise


@contextlib.contextmanager
def atomic_output(path: str | os.PathLike[str], mode: str = "w") -> Iterator[IO[Any]]:
    """Open ``path`` for writing so that a failure leaves it as it was.

    A regular file (or a new one) is written to a temporary file in its own
    folder and renamed into place on success; on any error the temporary
    file is removed. A symbolic link is followed (its final target is
    written this way; the link stays). A character or block device, a FIFO,
    a pipe (``/dev/fd/N``, ``/dev/stdout``), a terminal or a socket is
    written to directly and never replaced. A name (or link target) ending
    in ``.gz`` is written gzip-compressed (RFC 1952), reproducibly.

    Parameters
    ----------
    path : str or os.PathLike
        The output; ``-`` writes to standard output directly (uncompressed).
    mode : {"w", "wb"}

    Yields
    ------
    file object

    Raises
    ------
    InputError
        When the folder is missing, the output is a folder or a
        write-protected file, or the write fails for a reason the user can
        fix (full disk, quota, permissions, read-only file system; any error
        of a direct write); the temporary file is removed and an existing
        regular file is untouched.

    References
    ----------
    Deutsch (1996) RFC 1952, GZIP file format specification version 4.3.
    """
    target = os.fspath(path)
    if target == "-":
        stream = sys.stdout.buffer if "b" in mode else sys.stdout
        yield stream
        stream.flush()
        return
    final = _follow_links(target)
    packed = target.lower().endswith(".gz") or final.lower().endswith(".gz")
    folder = os.path.dirname(os.path.abspath(final))
    if not os.path.isdir(folder):
        raise InputError(f"folder {folder} does not exist; create it or choose another output path", source=target)
    kind = _target_kind(target, final)
    if kind is not None:
        with _direct_output(target, final, kind, mode, packed) as fh:
            yield fh
        return
    try:
        fd, tmp = tempfile.mkstemp(prefix=".", suffix=".part", dir=folder)
    except OSError as err:
        mapped = output_error(err, final)
        if mapped is None:
            raise
        raise mapped from None
    layers: list[Any] = []
    try:
        with contextlib.suppress(OSError):
            os.fchmod(fd, _new_file_mode(final))
        layers = _layers(os.fdopen(fd, "wb"), mode, packed)
        yield layers[-1]
        _finish(layers)
        os.fsync(layers[0].fileno())
        layers[0].close()
        os.replace(tmp, final)
    except OSError as err:
        _discard(layers)
        with contextlib.suppress(OSError):
            os.unlink(tmp)
        mapped = output_error(err, final)
        if mapped is None:
            raise
        raise mapped from None
    except BaseException:
        _discard(layers)
        with contextlib.suppress(OSError):
            os.unlink(tmp)
        raise


def write_text_atomic(path: str | os.PathLike[str], text: str) -> None:
    """Write ``text`` to ``path`` through :func:`atomic_output`.

    Parameters
    ----------
    path : str or os.PathLike
    text : str
    """
    with atomic_output(path) as fh:
        fh.write(text)
