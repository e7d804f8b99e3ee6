"""Names the explore command line needs without loading the fitting code (scipy)."""

FAMILIES = ("gaussian", "skewnormal")
EXPLORATORY_CAUTION = (
    "Clustering is exploratory: it generates hypotheses, and any subgroup needs "
    "confirmation in a separate validation sample."
)
