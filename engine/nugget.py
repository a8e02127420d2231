"""The nugget effect at the support of the composites, from a down-hole variogram fitted with
regularised (segment-averaged) shapes.

Samples and composites are averages over their lengths, not point values: averaging flattens the
variogram near the origin (regularisation; Journel and Huijbregts, *Mining Geostatistics*, 1978,
ch. II). A straight line through the first lags of touching 2 m composites therefore lands near zero
whatever the nugget: for a variogram of slope b the intercept of touching composites of length l is
about -b l / 3. Here the down-hole pairs are compared with what their supports make of a point model:

    E[(z_i - z_j)^2 / 2] = C0 + c [gbar(v_i, v_j) - (gbar(v_i, v_i) + gbar(v_j, v_j)) / 2]

for two intervals v_i, v_j of one hole, with gbar the average of the unit structure g(|x - y| / a)
over x in v_i and y in v_j (analytic: the expectation of a squared difference of two segment
averages). C0 is the variance of an interval's own error (its nugget), c and a the sill and practical
range of one structure along the hole. The fit is weighted least squares with weights N / gamma^2
(Cressie, "Fitting variogram models by weighted least squares", Math. Geology 17(5), 1985).

From samples, C0 is the nugget of one sample. A composite averages the errors of the samples it
holds with weights w_i (overlap length, times density when weighted), so its error variance is
C0 sum(w_i^2) / (sum w_i)^2 (analytic: the variance of a weighted mean of independent values): the
nugget at composite support is C0 times the mean over the composites of 1 / (effective number of
samples), (sum w)^2 / sum w^2 being that number. From composites alone, the same fit gives the
composites' own nugget directly.

Example
-------
>>> import numpy as np
>>> round(float(segment_mean("spherical", 10.0, np.array([0.0]), np.array([2.0]), np.array([2.0]))[0]), 6)
0.0996
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .model import unit_variogram

_NODES, _WEIGHTS = np.polynomial.legendre.leggauss(8)  # per smooth piece of each double integral
SHAPES = ("exponential", "spherical")
PRECISION_M = 0.05  # separations and lengths are grouped to this (metres) before the fit


def segment_mean(shape: str, range_m: float, start_m, length_a_m, length_b_m) -> np.ndarray:
    """Mean of the unit-sill structure g(|y - x| / range) over x in [0, la] and y in [s, s + lb]
    (``start_m`` = s, arrays broadcast). The double integral is one integral over u = y - x with
    the overlap length K(u) as weight, a piecewise linear function: Gauss-Legendre on each piece
    between its corners (and zero, where |u| has its kink) is exact to round-off for the smooth shapes."""
    s, la, lb = np.broadcast_arrays(np.asarray(start_m, dtype=np.float64), np.asarray(length_a_m, dtype=np.float64),
                                    np.asarray(length_b_m, dtype=np.float64))
    lo, hi = s - la, s + lb
    corners = np.stack([lo, np.minimum(s, s + lb - la), np.maximum(s, s + lb - la), hi, np.zeros_like(s)], axis=-1)
    corners = np.sort(np.clip(corners, lo[..., None], hi[..., None]), axis=-1)
    total = np.zeros(s.shape)
    for k in range(4):
        u0, u1 = corners[..., k], corners[..., k + 1]
        half, middle = 0.5 * (u1 - u0), 0.5 * (u1 + u0)
        u = middle[..., None] + half[..., None] * _NODES
        far = np.minimum(la[..., None], s[..., None] + lb[..., None] - u)
        overlap = np.clip(far - np.maximum(0.0, s[..., None] - u), 0.0, None)
        total = total + half * np.sum(_WEIGHTS * overlap * unit_variogram(shape, np.abs(u) / range_m), axis=-1)
    return total / (la * lb)


def regularised_increment(shape: str, range_m: float, start_m, length_a_m, length_b_m) -> np.ndarray:
    """gbar(v_a, v_b) - (gbar(v_a, v_a) + gbar(v_b, v_b)) / 2: the unit structure's semivariogram between
    two segments of one line, [0, la] and [s, s + lb]."""
    zero = np.zeros_like(np.asarray(start_m, dtype=np.float64))
    return (segment_mean(shape, range_m, start_m, length_a_m, length_b_m)
            - 0.5 * segment_mean(shape, range_m, zero, length_a_m, length_a_m)
            - 0.5 * segment_mean(shape, range_m, zero, length_b_m, length_b_m))


@dataclass
class DownholePairs:
    """Pairs of intervals within holes, grouped by the start-to-start separation and the two
    lengths (metres, to PRECISION_M): their count and half mean squared difference."""

    start_m: np.ndarray
    length_a_m: np.ndarray
    length_b_m: np.ndarray
    pairs: np.ndarray
    gamma: np.ndarray

    @property
    def count(self) -> int:
        return int(self.pairs.sum())


class DownholePairTable:
    """Every pair of intervals of one hole whose starts lie within ``reach_m`` of each other, both
    with a value: their group (separation and lengths to ``precision_m``), their hole and their half
    squared difference. ``grouped(hole_weights)`` sums them by group, each pair counting its hole's
    weight (the hole-wise bootstrap: a hole drawn twice counts twice)."""

    def __init__(self, hole, from_m, to_m, values, reach_m: float, precision_m: float = PRECISION_M):
        hole = np.asarray(hole)
        from_m, to_m = np.asarray(from_m, dtype=np.float64), np.asarray(to_m, dtype=np.float64)
        values = np.asarray(values, dtype=np.float64)
        keep = np.isfinite(values) & np.isfinite(from_m) & np.isfinite(to_m) & (to_m > from_m)
        order = np.lexsort((from_m[keep], hole[keep]))
        h, a, b, v = hole[keep][order], from_m[keep][order], to_m[keep][order], values[keep][order]
        keys, squares, holes = [], [], []
        n = len(v)
        for step in range(1, n):
            i = np.arange(n - step)
            j = i + step
            near = (h[i] == h[j]) & (a[j] - a[i] <= reach_m)
            if not near.any():
                break
            i, j = i[near], j[near]
            keys.append(np.round(np.c_[a[j] - a[i], b[i] - a[i], b[j] - a[j]] / precision_m).astype(np.int64))
            squares.append(0.5 * (v[i] - v[j]) ** 2)
            holes.append(h[i])
        self.precision_m = precision_m
        if keys:
            unique, self.group = np.unique(np.concatenate(keys), axis=0, return_inverse=True)
            self.group = self.group.ravel()
            self.squares = np.concatenate(squares)
            self.hole = np.concatenate(holes)
        else:
            unique, self.group = np.zeros((0, 3), dtype=np.int64), np.zeros(0, dtype=np.int64)
            self.squares, self.hole = np.zeros(0), np.zeros(0, dtype=hole.dtype)
        self.keys = unique

    def grouped(self, hole_weights=None) -> DownholePairs:
        """The groups' pair counts and half mean squared differences; ``hole_weights``: a weight per
        hole number (holes given as integers 0..n-1), None for one each."""
        w = np.ones(len(self.squares)) if hole_weights is None else np.asarray(hole_weights, dtype=np.float64)[
            self.hole]
        count = np.bincount(self.group, weights=w, minlength=len(self.keys))
        sums = np.bincount(self.group, weights=w * self.squares, minlength=len(self.keys))
        used = count > 0
        lengths = np.maximum(self.keys[used, 1:] * self.precision_m, self.precision_m / 2)  # no zero length
        return DownholePairs(self.keys[used, 0] * self.precision_m, lengths[:, 0], lengths[:, 1], count[used],
                             sums[used] / count[used])


def downhole_pairs(hole, from_m, to_m, values, reach_m: float, precision_m: float = PRECISION_M) -> DownholePairs:
    """Every pair of intervals of one hole whose starts lie within ``reach_m`` of each other, both
    with a value, grouped (see DownholePairs)."""
    return DownholePairTable(hole, from_m, to_m, values, reach_m, precision_m).grouped()


@dataclass
class AlongHoleFit:
    """The down-hole model fitted with regularised shapes: the nugget at the support of the
    intervals given, one structure's sill, shape and practical range along the holes."""

    nugget: float
    sill: float
    range_m: float
    shape: str
    pairs: int
    weighted_rss: float

    def gamma(self, start_m, length_a_m, length_b_m) -> np.ndarray:
        return self.nugget + self.sill * regularised_increment(self.shape, self.range_m, start_m, length_a_m,
                                                               length_b_m)


def fit_along_holes(pairs: DownholePairs, variance: float, min_pairs: int = 30, shapes=SHAPES,
                    start: "AlongHoleFit | None" = None) -> AlongHoleFit:
    """Fit nugget, sill and range along the holes to grouped interval pairs (weights N / gamma^2 of
    the model, iterated; Cressie 1985), in units of ``variance`` so that the fit is the same in any
    unit of the values. With ``start`` (a bootstrap replicate), only its shape, from its parameters."""
    from scipy.optimize import least_squares

    from .errors import FitError

    if pairs.count < min_pairs or len(pairs.pairs) == 0:
        raise FitError(f"{pairs.count:.0f} pairs of intervals within holes: too few to see the nugget down the holes.")
    unit = float(variance) if variance > 0 else 1.0
    s, la, lb, n, g = pairs.start_m, pairs.length_a_m, pairs.length_b_m, pairs.pairs, pairs.gamma / unit
    span = float(np.max(s + lb))
    if start is None:
        tries = [(shape, np.array([0.2, 0.8, r])) for shape in shapes for r in (0.1 * span, 0.4 * span, 1.5 * span)]
        rounds = 4
    else:
        tries = [(start.shape, np.array([start.nugget / unit, start.sill / unit, start.range_m]))]
        rounds = 2
    best = None
    for shape, x in tries:
        x = np.clip(x, [0.0, 0.0, 1e-2], [3.0, 5.0, 20.0 * span])
        for _ in range(rounds):  # weights N / model^2 from the previous solution
            weights = np.sqrt(n) / np.maximum(x[0] + x[1] * regularised_increment(shape, x[2], s, la, lb), 1e-3)

            def residual(p, w=weights):
                return w * (p[0] + p[1] * regularised_increment(shape, p[2], s, la, lb) - g)

            x = least_squares(residual, x, bounds=([0.0, 0.0, 1e-2], [3.0, 5.0, 20.0 * span]), x_scale="jac").x
        model = x[0] + x[1] * regularised_increment(shape, x[2], s, la, lb)
        wrss = float(np.sum(n * ((model - g) / np.maximum(model, 1e-3)) ** 2))
        if best is None or wrss < best.weighted_rss:
            best = AlongHoleFit(float(x[0] * unit), float(x[1] * unit), float(x[2]), shape, int(pairs.count), wrss)
    return best


@dataclass
class NuggetEstimate:
    """The nugget of the model (at composite support) and how it was found."""

    composite: float
    sample: float | None
    method: str
    mean_effective_samples: float | None
    along_holes: AlongHoleFit

    def to_json(self) -> dict:
        a = self.along_holes
        return {"composite_support": self.composite, "sample_support": self.sample, "method": self.method,
                "mean_effective_samples_per_composite": self.mean_effective_samples,
                "along_holes": {"shape": a.shape, "sill": a.sill, "range_m": a.range_m, "pairs": a.pairs,
                                "nugget_at_the_support_fitted": a.nugget}}


@dataclass
class Intervals:
    """Intervals of holes with one value each (samples before compositing): hole numbers, from and to
    (metres along the hole), values."""

    hole: np.ndarray
    from_m: np.ndarray
    to_m: np.ndarray
    values: np.ndarray


SAMPLE_METHOD = ("the samples' down-hole variogram fitted with regularised (segment-averaged) shapes, its nugget "
                 "carried to composite support as C0 x mean(1 / effective samples per composite)")
COMPOSITE_METHOD = ("the composites' down-hole variogram fitted with regularised (segment-averaged) shapes; no samples "
                    "were given, so there is no sample-support nugget")


class NuggetFit:
    """The nugget of a fit and of its bootstrap replicates, from one table of down-hole pairs: the
    samples' (with ``effective_samples``, one per composite, to carry it to composite support) or
    the composites' own."""

    def __init__(self, intervals: Intervals, effective_samples=None, min_pairs: int = 30):
        self.from_samples = effective_samples is not None
        lengths = np.asarray(intervals.to_m, dtype=np.float64) - np.asarray(intervals.from_m, dtype=np.float64)
        self.table = DownholePairTable(intervals.hole, intervals.from_m, intervals.to_m, intervals.values,
                                       default_reach(lengths))
        self.variance = float(np.nanvar(np.asarray(intervals.values, dtype=np.float64), ddof=1))
        self.effective = None if effective_samples is None else np.asarray(effective_samples, dtype=np.float64)
        self.min_pairs = min_pairs

    def _share(self, weights=None) -> float:
        """Mean of 1 / effective samples over the composites (weighted by the replicate's draws)."""
        if self.effective is None:
            return 1.0
        ok = np.isfinite(self.effective) & (self.effective > 0)
        w = np.ones(len(self.effective)) if weights is None else np.asarray(weights, dtype=np.float64)
        w = w * ok
        return float(np.sum(w[ok] / self.effective[ok]) / np.sum(w[ok])) if np.sum(w[ok]) > 0 else 1.0

    def estimate(self) -> NuggetEstimate:
        fit = fit_along_holes(self.table.grouped(), self.variance, self.min_pairs)
        self.main_ = fit
        share = self._share()
        if self.from_samples:
            return NuggetEstimate(fit.nugget * share, fit.nugget, SAMPLE_METHOD, float(1.0 / share), fit)
        return NuggetEstimate(fit.nugget, None, COMPOSITE_METHOD, None, fit)

    def replicate(self, hole_weights, point_weights) -> float:
        """A bootstrap replicate's nugget at composite support: pairs weighted by their hole's draws,
        started from the main fit."""
        fit = fit_along_holes(self.table.grouped(hole_weights), self.variance, self.min_pairs, start=self.main_)
        return fit.nugget * self._share(point_weights)


def nugget_from_samples(hole, from_m, to_m, values, effective_samples, min_pairs: int = 30) -> NuggetEstimate:
    """The nugget at sample support from the samples' down-hole variogram, carried to the composites:
    C0 times the mean of 1 / (effective number of samples) over the composites used."""
    return NuggetFit(Intervals(hole, from_m, to_m, values), effective_samples, min_pairs).estimate()


def nugget_from_composites(hole, from_m, to_m, values, min_pairs: int = 30) -> NuggetEstimate:
    """The composites' own nugget from their down-hole variogram fitted with regularised shapes."""
    return NuggetFit(Intervals(hole, from_m, to_m, values), None, min_pairs).estimate()


def default_reach(lengths_m) -> float:
    """How far down the hole the nugget fit looks: ten of the median interval length, at least 10 m."""
    lengths = np.asarray(lengths_m, dtype=np.float64)
    lengths = lengths[np.isfinite(lengths) & (lengths > 0)]
    return max(10.0, 10.0 * float(np.median(lengths))) if len(lengths) else 10.0


__all__ = ["segment_mean", "regularised_increment", "downhole_pairs", "fit_along_holes", "nugget_from_samples",
           "nugget_from_composites", "NuggetEstimate", "NuggetFit", "Intervals", "AlongHoleFit", "DownholePairs",
           "DownholePairTable", "default_reach"]
