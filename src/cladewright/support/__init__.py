"""Bootstrap support, consensus and tree comparison on splits.

References
----------
Felsenstein (1985) Evolution 39:783–791; Lemoine et al. (2018) Nature
556:452–456; Margush & McMorris (1981) Bull. Math. Biol. 43:239–244;
Robinson & Foulds (1981) Math. Biosci. 53:131–147; Kuhner & Felsenstein
(1994) Mol. Biol. Evol. 11:459–468.
"""

from .splits import (
    apply_support,
    branch_score,
    fbp_support,
    group_rows,
    majority_consensus,
    robinson_foulds,
    tbe_support,
)

__all__ = [
    "apply_support",
    "branch_score",
    "fbp_support",
    "group_rows",
    "majority_consensus",
    "robinson_foulds",
    "tbe_support",
]
