"""Internal: the input side of the readers (cladewright.read_alignment and kin).

Reading input files: plain, gzip-compressed (RFC 1952) or standard
input, decoded as UTF-8 text with its line endings made plain.

Writing outputs (atomically, so that a failed run never leaves a partial
file) is :mod:`cladewright.io.output`.

References
----------
Deutsch (1996) RFC 1952, GZIP file format specification version 4.3.
"""

from __future__ import annotations

import gzip
import os
import sys
import zlib

from ..errors import InputError

__all__ = ["read_bytes", "read_text"]

GZIP_MAGIC = b"\x1f\x8b"
# Other compressors' magic numbers, so that such a file gets a clear message
# (only gzip, RFC 1952, is read).
_OTHER_COMPRESSED = ((b"BZh", "bzip2"), (b"\xfd7zXZ\x00", "xz"), (b"PK\x03\x04", "zip"),
                     (b"\x28\xb5\x2f\xfd", "zstd"), (b"7z\xbc\xaf\x27\x1c", "7-Zip"))
_UTF16_32_BOMS = ((b"\xff\xfe\x00\x00", "UTF-32"), (b"\x00\x00\xfe\xff", "UTF-32"),
                  (b"\xff\xfe", "UTF-16"), (b"\xfe\xff", "UTF-16"))


def read_bytes(path: str | os.PathLike[str]) -> bytes:
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


def read_text(path: str | os.PathLike[str]) -> str:
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
