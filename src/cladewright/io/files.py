"""Reading input files (plain, gzip, standard input) and writing outputs
atomically, so that a failed run never leaves a partial file and never
spoils one the user already had."""

from __future__ import annotations

import contextlib
import errno
import gzip
import os
import stat
import sys
import tempfile
import zlib

from ..errors import InputError

__all__ = ["read_bytes", "read_text", "write_text_atomic", "atomic_output", "output_error"]

GZIP_MAGIC = b"\x1f\x8b"
# Other compressors' magic numbers, so that such a file gets a clear message
# (only gzip, RFC 1952, is read).
_OTHER_COMPRESSED = ((b"BZh", "bzip2"), (b"\xfd7zXZ\x00", "xz"), (b"PK\x03\x04", "zip"),
                     (b"\x28\xb5\x2f\xfd", "zstd"), (b"7z\xbc\xaf\x27\x1c", "7-Zip"))
_UTF16_32_BOMS = ((b"\xff\xfe\x00\x00", "UTF-32"), (b"\x00\x00\xfe\xff", "UTF-32"),
                  (b"\xff\xfe", "UTF-16"), (b"\xfe\xff", "UTF-16"))
# errno values of a failed write that the user can fix (space, quota,
# permissions, a read-only file system, a file too large for it).
_OUTPUT_ERRNOS = {errno.ENOSPC: "the disk is full", errno.EDQUOT: "the disk quota is exceeded",
                  errno.EACCES: "permission denied", errno.EPERM: "permission denied",
                  errno.EROFS: "the file system is read-only", errno.EFBIG: "the file is too large for "
                  "the file system"}


def read_bytes(path):
    """The bytes of ``path`` (``-`` for standard input), gunzipped when the
    content starts with the gzip magic number (RFC 1952).

    Parameters
    ----------
    path : str or os.PathLike

    Returns
    -------
    bytes

    Raises
    ------
    InputError
        For a missing, unreadable or damaged file, naming it and the fix.
    """
    source = "<stdin>" if os.fspath(path) == "-" else os.fspath(path)
    try:
        if source == "<stdin>":
            data = sys.stdin.buffer.read()
        else:
            with open(source, "rb") as fh:
                data = fh.read()
    except FileNotFoundError:
        raise InputError("no such file; check the path", source=source) from None
    except IsADirectoryError:
        raise InputError("is a folder, not a file; give the file inside it", source=source) from None
    except PermissionError:
        raise InputError("cannot be read (permission denied); check the file's permissions", source=source) from None
    except OSError as err:
        # a path too long, a file in place of a folder, an I/O error ...
        raise InputError(f"cannot be read ({err.strerror or err}); check the path and the disk",
                         source=source) from None
    if data[:2] == GZIP_MAGIC:
        try:
            data = gzip.decompress(data)
        except (EOFError, OSError, zlib.error):
            raise InputError("the gzip stream is truncated or damaged; copy or download the file again",
                             source=source) from None
    return data


def read_text(path):
    """The text of ``path`` decoded as UTF-8, with Windows (CRLF) and old
    Mac (CR) line endings made plain.

    Parameters
    ----------
    path : str or os.PathLike
        ``-`` reads standard input; gzip-compressed content is unpacked.

    Returns
    -------
    str

    Raises
    ------
    InputError
        For binary content, another compressor, UTF-16/32 or invalid UTF-8.
    """
    source = "<stdin>" if os.fspath(path) == "-" else os.fspath(path)
    data = read_bytes(path)
    for magic, name in _UTF16_32_BOMS:
        if data.startswith(magic):
            raise InputError(f"is {name} text; save the file as UTF-8 (or plain ASCII)", source=source)
    for magic, name in _OTHER_COMPRESSED:
        if data.startswith(magic):
            raise InputError(f"is {name}-compressed; unpack it first (only gzip is read directly)", source=source)
    if b"\x00" in data:
        raise InputError("is a binary file, not text; give a FASTA, NEXUS, Newick or TSV file", source=source)
    try:
        text = data.decode("utf-8-sig")
    except UnicodeDecodeError as err:
        line = data[: err.start].count(b"\n") + 1
        col = err.start - (data.rfind(b"\n", 0, err.start) + 1) + 1
        raise InputError(f"line {line}, byte {col}: not valid UTF-8 text; save the file as UTF-8",
                         source=source) from None
    return text.replace("\r\n", "\n").replace("\r", "\n")


def output_error(err, path, tail="nothing was written"):
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


def _new_file_mode(target):
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


@contextlib.contextmanager
def atomic_output(path, mode="w"):
    """Open a temporary file beside ``path``; on success rename it into
    place, on any error remove it and leave ``path`` as it was.

    Parameters
    ----------
    path : str or os.PathLike
        The output; ``-`` writes to standard output directly.
    mode : {"w", "wb"}

    Yields
    ------
    file object

    Raises
    ------
    InputError
        When the folder is missing or the write fails for a reason the user
        can fix (full disk, quota, permissions, read-only file system); the
        temporary file is removed and an existing ``path`` is untouched.
    """
    target = os.fspath(path)
    if target == "-":
        stream = sys.stdout.buffer if "b" in mode else sys.stdout
        yield stream
        stream.flush()
        return
    folder = os.path.dirname(os.path.abspath(target))
    if not os.path.isdir(folder):
        raise InputError(f"folder {folder} does not exist; create it or choose another output path", source=target)
    if os.path.isdir(target):
        raise InputError("the output is a folder; give a file name inside it", source=target)
    try:
        fd, tmp = tempfile.mkstemp(prefix=".", suffix=".part", dir=folder)
    except OSError as err:
        mapped = output_error(err, target)
        if mapped is None:
            raise
        raise mapped from None
    try:
        with contextlib.suppress(OSError):
            os.fchmod(fd, _new_file_mode(target))
        with os.fdopen(fd, mode, **({} if "b" in mode else {"encoding": "utf-8", "newline": "\n"})) as fh:
            yield fh
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(tmp, target)
    except OSError as err:
        with contextlib.suppress(OSError):
            os.unlink(tmp)
        mapped = output_error(err, target)
        if mapped is None:
            raise
        raise mapped from None
    except BaseException:
        with contextlib.suppress(OSError):
            os.unlink(tmp)
        raise


def write_text_atomic(path, text):
    """Write ``text`` to ``path`` through :func:`atomic_output`.

    Parameters
    ----------
    path : str or os.PathLike
    text : str
    """
    with atomic_output(path) as fh:
        fh.write(text)
