"""Internal: the replicate file of cladewright.bootstrap (save_replicates=, resume=).

The replicate file: one Newick tree per line, locked, recorded and resumable.

Replicate trees are written to the replicate file in index order, one Newick
tree per line, flushed as they complete. Beside it, ``FILE.run.json`` records
what the file was made from (seed, settings, a digest of the data), how many
lines were written, a running SHA-256 of them, and which replicates capped
saturated pairs; ``resume`` continues such a file and trusts only the lines
the record vouches for.
"""

from __future__ import annotations

import contextlib
import errno
import hashlib
import json
import os
import time
from types import ModuleType
from typing import IO, TYPE_CHECKING, Any, Iterable

import numpy as np

from ..errors import InputError
from ..io.output import atomic_output, output_error

if TYPE_CHECKING:
    from .jobs import ReplicateJob
    from ..tree import Tree

fcntl: ModuleType | None
try:
    import fcntl
except ImportError:  # Windows
    fcntl = None

__all__ = ["CHECKPOINT_SECONDS", "ReplicateFile", "refuse_existing", "run_key"]

_EXISTS = "the replicate file exists; pass resume=True to continue it, or choose a new path"
_NO_DIGEST = "0" * 64
CHECKPOINT_SECONDS = 1.0  # how often the run record catches up with the lines written


def run_key(job: ReplicateJob) -> dict[str, Any]:
    """What a replicate file was made from: resume refuses a file from another run.

    Parameters
    ----------
    job : ReplicateJob

    Returns
    -------
    dict
        ``seed``, ``settings`` and ``data`` (a SHA-256 of the patterns,
        weights, names and groups of identical sequences).
    """
    h = hashlib.sha256()
    h.update(np.ascontiguousarray(job.patterns).tobytes())
    h.update(np.ascontiguousarray(job.weights).tobytes())
    h.update("\t".join(job.names).encode())
    h.update("\t".join(job.all_names).encode())
    h.update(np.ascontiguousarray(job.group, dtype=np.int64).tobytes())
    return {"seed": job.seed, "settings": list(job.settings), "data": h.hexdigest()}


def refuse_existing(path: str | os.PathLike[str]) -> None:
    """Refuse to start a new replicate file over an existing one (``resume`` continues it)."""
    if os.path.lexists(path):
        raise InputError(_EXISTS, source=path)


def _sidecar(path: str | os.PathLike[str]) -> str:
    return os.fspath(path) + ".run.json"


def _chain(digest: str, line: bytes) -> str:
    """The running SHA-256 of the lines so far: each line hashed after the digest before it."""
    return hashlib.sha256(bytes.fromhex(digest) + line).hexdigest()


def _lock(fh: IO[bytes], path: str) -> None:
    """Hold the replicate file for this run alone (an exclusive lock, never waited for)."""
    try:
        if fcntl is not None:
            fcntl.flock(fh.fileno(), fcntl.LOCK_EX | fcntl.LOCK_NB)
        else:
            import msvcrt

            # msvcrt's names exist on Windows only, and type checkers read them for the platform they run on
            msvcrt.locking(fh.fileno(), msvcrt.LK_NBLCK, 1)  # type: ignore[attr-defined,unused-ignore]
    except OSError as err:
        if err.errno in (errno.EAGAIN, errno.EWOULDBLOCK, errno.EACCES, errno.EDEADLK):
            raise InputError("the replicate file is in use by another run (it is locked); wait for that run "
                             "to end, or choose another path", source=path) from None
        raise InputError(f"the replicate file cannot be locked on this file system ({err.strerror}); keep it "
                         "on a local disk", source=path) from None


def _write_error(err: OSError, path: str, tail: str = "nothing was written") -> Exception:
    mapped = output_error(err, path, tail=tail)
    return err if mapped is None else mapped


class ReplicateFile:
    """A replicate file held by one run: locked against other runs for the
    run's length, appended one whole line at a time, with a record of the run
    (``FILE.run.json``): what the file was made from, how many lines were
    written, a running SHA-256 of them, and which replicates capped
    saturated pairs. ``resume`` trusts only the lines the record vouches for.
    """

    path: str               # the replicate file
    fh: IO[bytes]           # held open, and locked, for the run
    key: dict[str, Any]     # what the file was made from (see run_key)
    lines: int              # replicate trees written
    digest: str             # running SHA-256 of those lines (hex)
    capped: list[int]       # replicates that capped saturated pairs
    saved: float            # time.monotonic() of the last record

    def __init__(self, path: str, fh: IO[bytes], key: dict[str, Any], lines: int = 0, digest: str = _NO_DIGEST,
                 capped: Iterable[int] = ()) -> None:
        self.path, self.fh, self.key = path, fh, key
        self.lines, self.digest, self.capped = lines, digest, list(capped)
        self.saved = time.monotonic()

    @classmethod
    def create(cls, path: str, key: dict[str, Any]) -> ReplicateFile:
        """A new replicate file at ``path`` (refused when one exists), locked, with its record."""
        try:
            fh = open(path, "xb")
        except FileExistsError:
            raise InputError(_EXISTS, source=path) from None
        except OSError as err:
            raise _write_error(err, path) from None
        try:
            _lock(fh, path)
            rf = cls(path, fh, key)
            rf.save()
        except BaseException:
            fh.close()
            with contextlib.suppress(OSError):
                os.unlink(path)  # ours, empty: a retry must not be told the file exists
            raise
        return rf

    @classmethod
    def resume(cls, path: str, key: dict[str, Any], replicates: int) -> tuple[ReplicateFile, list[Tree]]:
        """The file of an earlier run and the trees it holds (up to ``replicates``)."""
        try:
            fh = open(path, "r+b")
        except OSError as err:
            raise _write_error(err, path) from None
        try:
            _lock(fh, path)
            lines, digest, capped = cls._record(path, key)
            data = fh.read()
            whole = data[:data.rfind(b"\n") + 1].split(b"\n")[:-1]
            if len(whole) < lines:
                raise InputError(f"cannot resume: the run wrote {lines} replicate trees but the file holds "
                                 f"{len(whole)} whole lines (lines were deleted); start a new replicate file",
                                 source=path)
            check = _NO_DIGEST
            for line in whole[:lines]:
                check = _chain(check, line + b"\n")
            if check != digest:
                raise InputError(f"cannot resume: the first {lines} lines are not the replicate trees the run "
                                 "wrote (a line was changed, deleted or added); start a new replicate file",
                                 source=path)
            from ..io.readers import parse_newick

            trees = [parse_newick(whole[k].decode("utf-8"), source=f"{path} line {k + 1}")[0]
                     for k in range(min(lines, replicates))]
            # lines after the recorded ones (the last second of a killed run, a torn line) are made again
            keep = sum(len(x) + 1 for x in whole[:lines])
            fh.truncate(keep)
            fh.seek(keep)
        except BaseException:
            fh.close()
            raise
        return cls(path, fh, key, lines, digest, capped), trees

    @staticmethod
    def _record(path: str, key: dict[str, Any]) -> tuple[int, str, list[int]]:
        meta_path = _sidecar(path)
        try:
            with open(meta_path, encoding="utf-8") as fh:
                meta = json.load(fh)
            lines, digest, capped = int(meta["lines"]), str(meta["digest"]), [int(i) for i in meta["capped"]]
            bytes.fromhex(digest)
        except (OSError, ValueError, KeyError, TypeError):
            raise InputError(f"cannot resume: {meta_path} (the record of the run that made the file) is "
                             "missing or damaged; start a new replicate file", source=path) from None
        if {k: meta.get(k) for k in ("seed", "settings", "data")} != key:
            raise InputError("cannot resume: the file was made from other data, settings or seed; give the same "
                             "input and options (the seed is in " + meta_path + ") or start a new file",
                             source=path)
        return lines, digest, [i for i in capped if i < lines]

    def append(self, text: str, capped: bool) -> None:
        """Write one replicate tree's line (flushed); the record catches up every CHECKPOINT_SECONDS."""
        line = text.encode("utf-8")
        try:
            self.fh.write(line)
            self.fh.flush()
        except OSError as err:
            raise _write_error(err, self.path, "the replicates written so far are kept (continue with "
                               "resume=True)") from None
        self.digest = _chain(self.digest, line)
        if capped:
            self.capped.append(self.lines)
        self.lines += 1
        if time.monotonic() - self.saved >= CHECKPOINT_SECONDS:
            self.save()

    def save(self) -> None:
        """Bring the record up to the lines written; they reach the disk first."""
        os.fsync(self.fh.fileno())
        with atomic_output(_sidecar(self.path)) as fh:
            json.dump({**self.key, "lines": self.lines, "digest": self.digest, "capped": self.capped}, fh)
        self.saved = time.monotonic()

    def close(self, save: bool) -> None:
        """Let the file go; ``save`` brings the record up first (after a failed write or Ctrl-C)."""
        if save:
            # after a failed write or Ctrl-C: keep what is recorded, and the first error
            with contextlib.suppress(OSError, InputError):
                self.save()
        with contextlib.suppress(OSError):
            self.fh.close()
