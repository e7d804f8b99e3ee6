"""Clustering preview of the participant × feature matrix: is there any structure, and does a
skewed model explain it better than a Gaussian one?

Gaussian and multivariate skew-normal mixtures (Azzalini & Dalla Valle 1996; EM after Lin
2009 and Cabral, Lachos & Prates 2012) for K = 1..K_max on standardised columns, chosen by
BIC, with posterior membership, agreement between instrument blocks (adjusted Rand index)
and an optional development/validation split. Clustering is exploratory: it generates
hypotheses, and any subgroup needs confirmation in a separate validation sample.

Entry point for front ends: :func:`explore` (a DataFrame and a column specification in,
an :class:`ExploreResult` with the BIC table, membership and cluster sizes out).
"""

from sleepfuse.explore.columns import BLOCKS, ColumnSet, PreparedData, column_sets, prepare
from sleepfuse.explore.mixtures import FAMILIES, MixtureFit, fit_mixture, fit_mixtures
from sleepfuse.explore.selection import (
    EXPLORATORY_CAUTION,
    BlockResult,
    ExploreResult,
    HoldoutResult,
    adjusted_rand_index,
    explore,
    explore_block,
)

__all__ = [
    "BLOCKS", "FAMILIES", "EXPLORATORY_CAUTION", "ColumnSet", "PreparedData", "MixtureFit",
    "BlockResult", "ExploreResult", "HoldoutResult", "column_sets", "prepare", "fit_mixture",
    "fit_mixtures", "explore", "explore_block", "adjusted_rand_index",
]
