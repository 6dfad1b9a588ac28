"""Bootstrap support, consensus and tree comparison on splits.

- :mod:`.splits`: splits as bitsets, grouped and tallied over many trees;
- :mod:`.measures`: FBP and TBE support, and putting support on a tree;
- :mod:`.consensus`: majority-rule consensus;
- :mod:`.compare`: Robinson–Foulds and branch score distances.

The bootstrap itself (replicates, executors, replicate files) is
:mod:`cladewright.resampling`.

References
----------
Felsenstein (1985) Evolution 39:783–791; Lemoine et al. (2018) Nature
556:452–456; Margush & McMorris (1981) Bull. Math. Biol. 43:239–244;
Robinson & Foulds (1981) Math. Biosci. 53:131–147; Kuhner & Felsenstein
(1994) Mol. Biol. Evol. 11:459–468.
"""

from .compare import branch_score, robinson_foulds
from .consensus import majority_consensus
from .measures import apply_support, fbp_support, tbe_support
from .splits import group_rows

__all__ = [
    "apply_support",
    "branch_score",
    "fbp_support",
    "group_rows",
    "majority_consensus",
    "robinson_foulds",
    "tbe_support",
]
