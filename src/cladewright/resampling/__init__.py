"""The nonparametric bootstrap of sites (Felsenstein 1985), run in parallel.

A replicate is a multinomial draw of site counts over the distinct site
patterns; the distance engine takes those weights directly, so no replicate
alignment is ever built. Replicate ``i`` draws from its own stream,
``SeedSequence(seed, spawn_key=(i,))``, so every output is the same whatever
the number of workers or the executor. Replicate trees are written to the
replicate file in index order, one Newick tree per line, flushed as they
complete; ``resume`` continues such a file. Nothing outlives a call: each job
carries its own data.

- :mod:`.weights`: replicate site weights and their seed streams;
- :mod:`.jobs`: the job (the run's data, read-only) and one replicate tree;
- :mod:`.executors`: in line, local threads, or a Dask cluster;
- :mod:`.replicate_file`: the replicate file, its lock, record and resume;
- :mod:`.run`: :func:`bootstrap` and :class:`BootstrapResult`.

The package is named for what it does (resampling sites), not ``bootstrap``,
so that ``cladewright.bootstrap`` stays the function of the public API and
every submodule path (``cladewright.resampling.jobs``) works as written.

References
----------
Felsenstein (1985) Evolution 39:783–791; Lemoine et al. (2018) Nature
556:452–456.
"""

from .run import BootstrapResult, bootstrap
from .weights import replicate_weights

__all__ = ["BootstrapResult", "bootstrap", "replicate_weights"]
