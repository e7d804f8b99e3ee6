"""Clustering preview of the participant × feature matrix: is there any structure, and does a
skewed model explain it better than a Gaussian one?

Gaussian, multivariate skew-normal (Azzalini & Dalla Valle 1996; EM after Lin 2009 and
Cabral, Lachos & Prates 2012), multivariate t (Peel & McLachlan 2000) and restricted skew-t
mixtures (Lin 2010; Lee & McLachlan 2014) for
K = 1..K_max on standardised columns, chosen by BIC, with posterior membership, agreement
between instrument blocks (adjusted Rand index), an optional development/validation split
and a bootstrap of the preferred solution's stability. Clustering is exploratory: it generates
hypotheses, and any subgroup needs confirmation in a separate validation sample.

Entry point for front ends: :func:`explore` (a DataFrame and a column specification in,
an :class:`ExploreResult` with the BIC table, membership and cluster sizes out).
"""

_EXPORTS = {
    "BLOCKS": "columns", "ColumnSet": "columns", "PreparedData": "columns", "column_sets": "columns",
    "prepare": "columns", "FAMILIES": "names", "EXPLORATORY_CAUTION": "names", "MixtureFit": "mixtures",
    "fit_mixture": "mixtures", "fit_mixtures": "mixtures", "preferred_fit": "mixtures", "BlockResult": "selection",
    "ExploreResult": "selection", "HoldoutResult": "holdout", "adjusted_rand_index": "agreement",
    "explore": "selection", "explore_block": "selection",
}
__all__ = sorted(_EXPORTS)


def __getattr__(name: str):
    """Load the fitting code only when it is used (PEP 562), so the command line starts fast."""
    if name in _EXPORTS:
        import importlib

        return getattr(importlib.import_module(f"sleepfuse.explore.{_EXPORTS[name]}"), name)
    raise AttributeError(f"module 'sleepfuse.explore' has no attribute {name!r}")
