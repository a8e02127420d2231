"""Slow, obvious references for engine.stationarity."""

import numpy as np
from scipy.spatial.distance import pdist


def class_sums(xyz, values, coords, width, classes):
    """Every unordered pair by distance class, from scipy's pdist and plain numpy."""
    xyz = np.asarray(xyz, dtype=float)
    values = np.asarray(values, dtype=float)  # (n, m)
    coords = np.asarray(coords, dtype=float)  # (n, q)
    d = pdist(xyz)
    i, j = np.triu_indices(len(xyz), k=1)
    k = (d / width).astype(np.int64)
    keep = k < classes
    out = np.zeros((classes, 2 + values.shape[1] + coords.shape[1]))
    np.add.at(out[:, 0], k[keep], 1.0)
    np.add.at(out[:, 1], k[keep], d[keep])
    for a in range(values.shape[1]):
        np.add.at(out[:, 2 + a], k[keep], (values[i, a] - values[j, a])[keep] ** 2)
    for b in range(coords.shape[1]):
        np.add.at(out[:, 2 + values.shape[1] + b], k[keep], (coords[i, b] * coords[j, b])[keep])
    return out
