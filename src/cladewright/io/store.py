"""Internal: the chunked store of a tiled distance matrix (Zarr), as plain values.

A store is a directory holding a Zarr group with

- ``distances``: the m x m matrix of the distinct sequences (identical
  sequences entered once), in square chunks of one tile each, symmetric,
  float32 or float64; a saturated pair holds its undefined value (NaN or
  inf) as computed, and the saturation rule is applied when the store is read;
- ``done``: one boolean per tile (row tile <= column tile), set after the tile
  and its mirror image are written, so that a resumed run computes only the
  missing tiles; ``tile_undefined`` and ``tile_largest`` beside it: each
  tile's count of undefined distances and its largest defined one, so that
  the saturation rule needs no second reading of the matrix;
- ``group``: for each of the n sequences, its row in ``distances``;
- attributes: the names of all n sequences, the settings that made the matrix
  (model, gamma, gaps, frequencies, precision, tile size), the SHA-256 of the
  input, and, once every tile is done, the run's facts (sites used,
  saturated pairs and the cap).

Zarr is an optional dependency (``pip install "cladewright[cluster]"``),
imported only here and only when a store is used. The calls kept to are those
common to zarr 2.18 and 3.x. Zarr storage specification: https://zarr-specs.readthedocs.io
"""

from __future__ import annotations

import os
from typing import Any, Mapping

import numpy as np
from numpy.typing import NDArray

from ..errors import InputError

__all__ = ["STORE_KIND", "is_store", "create_store", "open_for_resume", "write_tile", "mark_done", "missing_tiles",
           "finish_store", "store_attributes", "read_store_rows", "tile_facts", "matrix_info",
           "start_run", "open_for_tiles"]

#: The attribute that marks a directory as a cladewright distance store.
STORE_KIND = "cladewright distance matrix, tiled"


def _zarr() -> Any:
    try:
        import zarr
    except ImportError:
        raise InputError('a distance store (.zarr) needs Zarr: pip install "cladewright[cluster]"') from None
    return zarr


def is_store(path: str | os.PathLike[str]) -> bool:
    """True for a directory that looks like a Zarr store (``.zarr`` suffix or Zarr metadata inside)."""
    p = os.fspath(path)
    if not os.path.isdir(p):
        return False
    return p.rstrip("/").lower().endswith(".zarr") or any(
        os.path.exists(os.path.join(p, f)) for f in ("zarr.json", ".zgroup"))


def create_store(path: str, m: int, tile: int, dtype: np.dtype[Any], group: NDArray[np.int64],
                 attrs: Mapping[str, Any]) -> Any:
    """A new store for an m x m matrix in tiles of ``tile`` rows; refuses an existing path."""
    zarr = _zarr()
    if os.path.lexists(path):
        raise InputError(f"the output {path} exists; choose a new path, remove it, or pass resume=True to "
                         "continue the run that made it")
    parent = os.path.dirname(os.path.abspath(path))
    if not os.access(parent, os.W_OK):
        raise InputError(f"cannot write {path}: its folder is write-protected; choose another output path")
    root = zarr.open_group(path, mode="w-")
    nt = -(-m // tile)
    # distances compress little, and compressing them costs more time than computing them
    if int(zarr.__version__.split(".")[0]) >= 3:
        root.create_array(name="distances", shape=(m, m), chunks=(tile, tile), dtype=dtype, fill_value=0,
                          compressors=None)
    else:
        root.zeros(name="distances", shape=(m, m), chunks=(tile, tile), dtype=dtype, compressor=None)
    root.zeros(name="done", shape=(nt, nt), chunks=(nt, nt), dtype=bool)
    root.zeros(name="tile_undefined", shape=(nt, nt), chunks=(nt, nt), dtype=np.int64)
    root.zeros(name="tile_largest", shape=(nt, nt), chunks=(nt, nt), dtype=np.float64)
    root.zeros(name="group", shape=group.shape, chunks=(max(1, group.size),), dtype=np.int64)
    root["group"][:] = group
    root.attrs.update(dict(attrs, kind=STORE_KIND, complete=False))
    return root


def open_for_resume(path: str, attrs: Mapping[str, Any], compared: tuple[str, ...]) -> Any:
    """An existing store to continue; refuses one made from another input or with other settings."""
    zarr = _zarr()
    if not is_store(path):
        raise InputError(f"resume=True continues a distance store, but {path} is not one; "
                         "pass resume=False to start a new store")
    if not os.access(path, os.W_OK):
        raise InputError(f"the store {path} is write-protected; make it writable (chmod -R u+w) to resume it")
    root = zarr.open_group(path, mode="r+")
    old = dict(root.attrs)
    if old.get("kind") != STORE_KIND:
        raise InputError(f"{path} is not a cladewright distance store; choose another output path")
    for key in compared:
        if _plain(old.get(key)) != _plain(attrs.get(key)):
            what = "another input" if key == "input_sha256" else f"{key} {old.get(key)!r}, not {attrs.get(key)!r}"
            raise InputError(f"the store {path} was made from {what}; resume with the same input and settings, "
                             "or write a new store")
    return root


def _plain(value: Any) -> Any:
    """Attribute values as JSON gives them back (tuples as lists)."""
    return list(value) if isinstance(value, tuple) else value


def missing_tiles(root: Any) -> list[tuple[int, int]]:
    """The tiles (row tile <= column tile) not yet marked done."""
    done = np.asarray(root["done"][:])
    rows, cols = np.nonzero(~done)
    keep = rows <= cols
    return [(int(a), int(b)) for a, b in zip(rows[keep], cols[keep])]


def write_tile(root: Any, tile: int, ti: int, tj: int, block: NDArray[np.floating]) -> None:
    """Write one tile and its mirror image (the matrix is stored whole)."""
    arr = root["distances"]
    r0, c0 = ti * tile, tj * tile
    arr[r0:r0 + block.shape[0], c0:c0 + block.shape[1]] = block
    if ti != tj:
        arr[c0:c0 + block.shape[1], r0:r0 + block.shape[0]] = block.T


def mark_done(root: Any, ti: int, tj: int, undefined: int, largest: float) -> None:
    """Record a tile as written (after :func:`write_tile` returned), with its number of undefined
    distances and its largest defined one (0 if none is larger), for the saturation rule."""
    root["tile_undefined"][ti, tj] = undefined
    root["tile_largest"][ti, tj] = largest
    root["done"][ti, tj] = True


def tile_facts(root: Any) -> tuple[NDArray[np.int64], NDArray[np.float64]]:
    """Each tile's number of undefined distances and largest defined distance."""
    return np.asarray(root["tile_undefined"][:]), np.asarray(root["tile_largest"][:])


def start_run(root: Any) -> str:
    """Mark the store with a token of this run (random), by which a worker process tells that the store
    it sees at the store's path is this very store (:func:`open_for_tiles`); returns the token."""
    import secrets

    token = secrets.token_hex(16)
    root.attrs.update(run_token=token)
    return token


def open_for_tiles(path: str, token: str) -> Any | None:
    """The store at ``path`` for a worker to write its own tiles into, when it is this run's store (the
    token of :func:`start_run`); None when this process does not see it (no shared file system, another
    store at the same path, no Zarr): the worker then sends its tiles back instead."""
    try:
        root = _zarr().open_group(path, mode="r+")
        return root if root.attrs.get("run_token") == token else None
    except (InputError, OSError, KeyError, ValueError, FileNotFoundError):
        return None


def finish_store(root: Any, facts: Mapping[str, Any]) -> None:
    """Record the run's facts and that every tile is done (the run's token goes: a finished store's
    attributes are the same whoever computed its tiles)."""
    attrs = {k: v for k, v in dict(root.attrs).items() if k != "run_token"}
    root.attrs.put(dict(attrs, **facts, complete=True))


def store_attributes(path: str | os.PathLike[str]) -> tuple[dict[str, Any], NDArray[np.int64], tuple[int, int]]:
    """The attributes, the row of each sequence, and the (m, m) shape of a finished store."""
    zarr = _zarr()
    p = os.fspath(path)
    try:
        root = zarr.open_group(p, mode="r")
        attrs = dict(root.attrs)
        shape = tuple(root["distances"].shape)
        group = np.asarray(root["group"][:], dtype=np.int64)
    except (KeyError, ValueError, OSError, FileNotFoundError) as err:
        raise InputError(f"{p} is not a readable distance store ({type(err).__name__}); write it with "
                         "cladewright distances ALIGNMENT -o FILE.zarr") from None
    if attrs.get("kind") != STORE_KIND:
        raise InputError(f"{p} is not a cladewright distance store; write one with cladewright distances "
                         "ALIGNMENT -o FILE.zarr")
    if not attrs.get("complete"):
        raise InputError(f"the store {p} is not finished (a run stopped); finish it by computing the distances "
                         "again into it with resume=True")
    return attrs, group, (int(shape[0]), int(shape[1]))


def read_store_rows(path: str | os.PathLike[str], r0: int, r1: int) -> NDArray[np.floating]:
    """Rows r0..r1 of the stored (distinct) matrix, read chunk by chunk."""
    zarr = _zarr()
    root = zarr.open_group(os.fspath(path), mode="r")
    return np.asarray(root["distances"][r0:r1, :])


def matrix_info(attrs: Mapping[str, Any]) -> dict[str, Any]:
    """The facts of a store that a distance matrix's ``info`` carries (model, gamma, gaps, frequencies,
    saturated pairs, cap, ...), without the store's own bookkeeping."""
    return {k: v for k, v in attrs.items() if k not in ("names", "kind", "complete", "n_rows", "tile",
                                                       "input_sha256", "dtype", "alphabet")}
