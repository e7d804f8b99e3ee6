"""Agreement of two partitions of the same participants: the adjusted Rand index."""

from __future__ import annotations

import numpy as np


def adjusted_rand_index(labels_a, labels_b) -> float:
    """Adjusted Rand index of two partitions of the same items (Hubert & Arabie 1985, eq. 5).

    1 for identical partitions, about 0 for chance agreement; like scikit-learn, 1 when
    both partitions are trivial in the same way (one cluster, or all singletons).
    """
    a = np.unique(np.asarray(labels_a), return_inverse=True)[1].ravel()
    b = np.unique(np.asarray(labels_b), return_inverse=True)[1].ravel()
    if a.size != b.size:
        raise ValueError("the two partitions must label the same items")
    n = a.size
    table = np.zeros((a.max() + 1 if n else 0, b.max() + 1 if n else 0))
    np.add.at(table, (a, b), 1.0)
    na, nb = table.shape
    if n == 0 or na == nb == 1 or na == nb == n:
        return 1.0

    def pairs(counts):
        return float(np.sum(counts * (counts - 1.0) / 2.0))

    index = pairs(table)
    row, col = pairs(table.sum(axis=1)), pairs(table.sum(axis=0))
    expected = row * col / (n * (n - 1.0) / 2.0)
    maximum = 0.5 * (row + col)
    return float((index - expected) / (maximum - expected)) if maximum != expected else 0.0
