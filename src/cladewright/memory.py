"""Internal: the memory check the command line makes before a run.

How much memory a run needs, checked before it starts.

A run over n taxa holds the n x n distance matrix, and a tree method holds a
working copy (NJ a whole matrix, BIONJ a second one for its variances, the
linkage methods one triangle). A bootstrap holds that again in every worker,
for the replicate it is building. The estimate is compared with the memory
the system has available, so that a run that cannot fit stops at once, with
the options that would fit, instead of failing hours later. A bootstrap also
keeps every replicate tree until the support is counted, so the number of
replicates is checked the same way.
"""

from __future__ import annotations

import os
from typing import Any

from .choices import JOINING_METHODS, LINKAGE_METHODS
from .errors import InputError

__all__ = ["estimate_bytes", "available_bytes", "check_fits", "replicate_tree_bytes", "check_replicates_fit"]

# Interpreter, numpy, scipy and numba with their compiled kernels, per process (measured: about 0.35 GiB).
PROCESS_BASE = 400 * 2**20
# The count block beside the output matrix (distances.counts.BLOCK_BYTES) and formula temporaries.
DISTANCE_WORK = 150 * 2**20
# A kept replicate tree: its parent, length, support and traversal arrays, a label list and the objects
# around them (measured with tracemalloc after the support count: about 1.5 kB + 0.2 kB per taxon), rounded up.
TREE_BASE = 2048
TREE_PER_TAXON = 256
#: n x n matrices a tree method holds besides the input: the linkage methods one triangle (half a matrix),
#: NJ its working copy, BIONJ also its variances (Gascuel 1997); greedy BME insertion none of its own
#: beside the (2n)^2 table of subtree averages it shares with the search (estimate_bytes counts that).
WORKING_MATRICES: dict[str, float] = {**dict.fromkeys(LINKAGE_METHODS, 0.5), **dict.fromkeys(JOINING_METHODS, 1),
                                      "bionj": 2, "bme": 0}
#: The table of subtree averages of the minimum-evolution searches holds float64 numbers up to this size
#: (trees of up to about 500 taxa) and float32 numbers above it: half the memory and memory traffic, so that
#: at 10,000 taxa it needs twice the input matrix rather than four times. Seven significant digits are far
#: finer than the sampling error of distances estimated from sequences; the searches' tolerance for
#: rounding follows the type (common practice).
TABLE_DOUBLE_BYTES = 8 * 2**20


def table_itemsize(n: int) -> int:
    """Bytes per number of the (2n − 2)^2 table of subtree averages on n taxa: 8 or 4."""
    m = max(2 * n - 2, 1)
    return 8 if m * m * 8 <= TABLE_DOUBLE_BYTES else 4


#: The method suggested when BIONJ does not fit: the same search without the variance matrix.
LEANER: dict[str, str] = {"bionj": "nj"}


def _matrices(method: str | None) -> float:
    """n x n matrices ``method`` holds besides the input (see :data:`WORKING_MATRICES`); none without one."""
    if method is None:
        return 0
    return WORKING_MATRICES.get(str(method).lower(), 0.5)


def estimate_bytes(n: int, *, method: str | None = None, precision: str = "double", workers: int = 0,
                   refine: str | None = None, stored: bool = False) -> int:
    """Peak bytes of a run on ``n`` taxa.

    Parameters
    ----------
    n : int
    method : str, optional
        The tree method (None: distances only).
    precision : {"double", "single"}
        float64 or float32 matrices.
    workers : int
        Bootstrap workers (0: no bootstrap); each holds a replicate's matrix
        and the method's working copies of its own.
    refine : {None, "none", "nni", "spr"}
        A topology search after the start holds the table of subtree
        averages, (2n)^2 numbers (Desper & Gascuel 2002; float32 above
        :data:`TABLE_DOUBLE_BYTES`), once the start's own working copies are freed.
    stored : bool
        The matrix comes from a distance store: nj, bionj and the linkage
        methods read it straight into their work space, so only that is held
        (:func:`cladewright.store_tree.tree_from_store`).
    """
    item = 8 if precision == "double" else 4
    square = n * n * item
    work = square * _matrices(method)
    if refine not in (None, "none") or str(method).lower() == "bme":
        work = max(work, 4 * n * n * table_itemsize(n))
    if stored and refine in (None, "none") and str(method).lower() != "bme" and method is not None:
        return int(PROCESS_BASE + work)
    main = PROCESS_BASE + DISTANCE_WORK + square + work
    per_worker = DISTANCE_WORK + square + work  # threads of the same process
    return int(main + workers * per_worker)


def available_bytes() -> int | None:
    """Memory the system can give now (MemAvailable), or None where unknown."""
    try:
        with open("/proc/meminfo") as fh:
            for line in fh:
                if line.startswith("MemAvailable:"):
                    return int(line.split()[1]) * 1024
    except OSError:
        pass
    try:
        return os.sysconf("SC_AVPHYS_PAGES") * os.sysconf("SC_PAGE_SIZE")
    except (ValueError, OSError, AttributeError):
        return None


def _gib(x: float) -> str:
    return f"{x / 2**30:.1f} GiB" if x < 2**40 else f"{x / 2**40:,.1f} TiB"


def replicate_tree_bytes(n: int) -> int:
    """Bytes one kept replicate tree over ``n`` taxa takes (an upper estimate).

    Parameters
    ----------
    n : int

    Returns
    -------
    int
    """
    return TREE_BASE + TREE_PER_TAXON * int(n)


def _round_down(count: int) -> int:
    """``count`` cut to two significant digits, so that the advice reads as a round number."""
    step = 10 ** max(0, len(str(count)) - 2)
    return count // step * step


def check_replicates_fit(n: int, replicates: int, *, method: str | None = None, precision: str = "double",
                         workers: int = 0, available: int | None = None) -> None:
    """Raise :class:`InputError` when ``replicates`` trees over ``n`` taxa cannot be kept in memory
    beside the run itself, naming a count that fits.

    Parameters
    ----------
    n : int
        Taxa.
    replicates : int
    method, precision, workers : see :func:`estimate_bytes`
    available : int, optional
        Bytes available (default: :func:`available_bytes`).
    """
    available = available_bytes() if available is None else available
    if available is None:
        return
    run = estimate_bytes(n, method=method, precision=precision, workers=workers)
    each = replicate_tree_bytes(n)
    if run + replicates * each <= available:
        return
    fit = (available - run) // each
    if fit < 1:
        return  # the run alone does not fit: check_fits says so, with its own fixes
    raise InputError(f"{replicates} replicates need about {_gib(replicates * each)} of memory for their trees "
                     f"but {_gib(available - run)} is left beside the run; ask for at most {_round_down(fit)} "
                     "replicates")


def check_fits(n: int, *, method: str | None = None, precision: str = "double", workers: int = 0,
               available: int | None = None, refine: str | None = None, stored: bool = False) -> None:
    """Raise :class:`InputError` when the run cannot fit, naming what would (``stored``: see
    :func:`estimate_bytes`)."""
    available = available_bytes() if available is None else available
    if available is None:
        return

    def need_for(**change: Any) -> int:
        settings = dict(method=method, precision=precision, workers=workers, refine=refine, stored=stored)
        settings.update(change)
        return estimate_bytes(n, **settings)

    need = need_for()
    if need <= available:
        return
    # the fixes in the library's terms (parameters); the command line shows them as its options
    fixes = []
    if precision == "double" and need_for(precision="single") <= available:
        fixes.append('precision="single"')
    for w in range(workers - 1, 0, -1):
        if need_for(workers=w) <= available:
            fixes.append(f"workers={w}")
            break
    leaner = LEANER.get(str(method).lower()) if method else None
    if leaner and need_for(method=leaner) <= available:
        fixes.append(f'method="{leaner}"')
    hint = ("; " + " or ".join(fixes) + " would fit") if fixes else "; use a machine with more memory or fewer taxa"
    raise InputError(f"{n} taxa need about {_gib(need)} of memory but {_gib(available)} is available{hint}")
