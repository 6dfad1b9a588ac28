"""Reading input files (plain, gzip, standard input) and writing outputs
atomically, so that a failed run never leaves a partial file and never
spoils one the user already had."""

from __future__ import annotations

import contextlib
import gzip
import os
import sys
import tempfile
import zlib

from ..errors import InputError

__all__ = ["read_bytes", "read_text", "write_text_atomic", "atomic_output"]

GZIP_MAGIC = b"\x1f\x8b"


def read_bytes(path):
    """The bytes of ``path`` (``-`` for standard input), gunzipped when the
    content starts with the gzip magic number (RFC 1952)."""
    source = os.fspath(path)
    try:
        if source == "-":
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
    if data[:2] == GZIP_MAGIC:
        try:
            data = gzip.decompress(data)
        except (EOFError, OSError, zlib.error):
            raise InputError("the gzip stream is truncated or damaged; copy or download the file again",
                             source=source) from None
    return data


def read_text(path):
    """The text of ``path`` decoded as UTF-8, with Windows and old Mac line
    endings made plain."""
    source = os.fspath(path)
    data = read_bytes(path)
    if b"\x00" in data:
        raise InputError("is a binary file, not text; give a FASTA, NEXUS, Newick or TSV file", source=source)
    try:
        text = data.decode("utf-8-sig")
    except UnicodeDecodeError as err:
        line = data[: err.start].count(b"\n") + 1
        raise InputError(f"line {line}: not valid UTF-8 text; save the file as UTF-8", source=source) from None
    return text.replace("\r\n", "\n").replace("\r", "\n")


@contextlib.contextmanager
def atomic_output(path, mode="w"):
    """Open a temporary file beside ``path``; on success rename it into
    place, on any error remove it and leave ``path`` as it was.

    ``path`` ``-`` writes to standard output directly.
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
    fd, tmp = tempfile.mkstemp(prefix=".", suffix=".part", dir=folder)
    try:
        with os.fdopen(fd, mode, **({} if "b" in mode else {"encoding": "utf-8", "newline": "\n"})) as fh:
            yield fh
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(tmp, target)
    except BaseException:
        with contextlib.suppress(FileNotFoundError):
            os.unlink(tmp)
        raise


def write_text_atomic(path, text):
    """Write ``text`` to ``path`` through :func:`atomic_output`."""
    with atomic_output(path) as fh:
        fh.write(text)
