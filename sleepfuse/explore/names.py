"""Names the explore command line needs without loading the fitting code (scipy)."""

FAMILIES = ("gaussian", "skewnormal", "t", "skewt")
DEFAULT_FAMILIES = FAMILIES[:3]    # skewt on request: its ECME ν step makes it several times slower
EXPLORATORY_CAUTION = (
    "Clustering is exploratory: it generates hypotheses, and any subgroup needs "
    "confirmation in a separate validation sample."
)

# Defaults shared by the command line and the app's clusters screen.
DEFAULT_KMAX = 5
DEFAULT_STARTS = 20        # k-means++ starts; as many random-partition starts are added
DEFAULT_MAX_ITER = 5000   # skew-normal ECM often needs 1,000-2,500 iterations to meet the relative tolerance
