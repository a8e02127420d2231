"""Principal directions of continuity and the fitted variogram model (docs/methods.md, "Fitting").

The steps, each from the pair engine in few passes:

1. Nugget: fitted to the samples' down-hole variogram (before compositing, at their own lengths) with
   shapes averaged over the samples' intervals, and carried to the composites' support as a pure
   nugget averages (engine/nugget.py); it is held fixed in the steps below.
2. Global search: a Fibonacci set of directions over the lower hemisphere, each with its directional
   variogram; a direction's score is the mean of its variogram over the lags, over the variance
   (lower: more continuous), smoothed over the neighbouring directions. The major axis is the best.
3. The semi-major axis: a fan in the plane normal to the major; the minor axis is their normal.
4. A first fit of sills and ranges on the three principal directional variograms (axes fixed), then a
   local refinement of the three rotation angles together with the sills and ranges against the
   variogram volume.
5. The final fit: the three principal directional variograms along the refined axes and the
   down-hole variogram (lags of one composite, along each hole: it sees ranges shorter than the hole
   spacing in the direction of the holes), fitted jointly by weighted least squares (weights: pairs
   over mean lag distance; the down-hole lags weigh, together, as much as one principal direction)
   with sills >= 0 and ranges
   major >= semi-major >= minor, none longer than the longest lag (no pair could show it); one or
   two structures and the shape chosen by cross-validation over groups of holes.
6. Uncertainty: a hole-wise bootstrap repeats steps 1, 4 and 5 with holes resampled with replacement
   (each hole weighted by the number of times it was drawn; copies of a hole do not pair with each
   other), giving intervals for each axis (degrees) and each range.
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass, field

import numpy as np

from .errors import FitError
from .framevolume import FrameVolume, hole_frame, hole_vectors, start_orientations
from .model import AXIS_NAMES, Model, Structure
from .orientation import trend_plunge
from .pairs import PairIndex
from .pairs import _kernels as k
from .variogram import Direction, LagBins, Sets, VolumeGrid, accumulate


CV_GROUPS = 5  # groups of holes left out in turn to choose the structures


@dataclass
class FitOptions:
    """Choices of the fit. Lengths in metres, angles in degrees. ``lag_m`` None: from the data."""

    lag_m: float | None = None
    lags: int = 12
    search_directions: int = 300
    search_tolerance_deg: float = 12.0
    fan_directions: int = 36
    principal_tolerance_deg: float = 15.0
    smoothing_deg: float = 15.0
    structures: str = "auto"  # "1", "2" or "auto"
    shapes: tuple = ("spherical", "exponential")
    min_pairs: int = 30
    bootstrap: int = 50
    bootstrap_block_m: float | None = None  # None: blocks of holes half the major range wide; 0: single holes
    seed: int = 0
    threads: int | None = None
    volume_cells: tuple = (12, 12, 12)
    nugget: float | None = None  # fixed by the user (composite support), else fitted
    axes: tuple | None = None  # rows major, semi-major, minor fixed by the user, else searched and fitted


def fibonacci_directions(count: int) -> np.ndarray:
    """``count`` unit vectors spread evenly over the lower hemisphere (plunge 0-90)."""
    i = np.arange(count) + 0.5
    down = i / count  # -z uniformly in (0, 1]: equal areas
    golden = math.pi * (3.0 - math.sqrt(5.0))
    r = np.sqrt(1.0 - down**2)
    return np.c_[r * np.cos(golden * i), r * np.sin(golden * i), -down]


def _direction(u, tolerance_deg) -> Direction:
    trend, plunge = trend_plunge(u)
    return Direction(trend, plunge, tolerance_deg)


def _frame(axis):
    """The unit ``axis`` and two unit vectors normal to it and to each other."""
    axis = np.asarray(axis, dtype=np.float64)
    axis = axis / np.linalg.norm(axis)
    helper = np.array([0.0, 0.0, 1.0]) if abs(axis[2]) < 0.9 else np.array([1.0, 0.0, 0.0])
    e1 = np.cross(axis, helper)
    e1 /= np.linalg.norm(e1)
    return axis, e1, np.cross(axis, e1)


def perpendicular_fan(axis, count: int) -> np.ndarray:
    """``count`` unit vectors over 180 degrees in the plane normal to ``axis``."""
    _, e1, e2 = _frame(axis)
    a = np.pi * np.arange(count) / count
    return np.cos(a)[:, None] * e1 + np.sin(a)[:, None] * e2


@dataclass
class Experimental:
    """A directional (or down-hole) experimental variogram: lag distances, gamma and pairs."""

    distance: np.ndarray
    gamma: np.ndarray
    pairs: np.ndarray
    vectors: np.ndarray | None = None  # (lags, K, 3) unit directions spread as each lag's pairs are (pair_directions)

    def supported(self, min_pairs):
        return (self.pairs >= min_pairs) & np.isfinite(self.gamma) & np.isfinite(self.distance)


def _line_sets(acc, first_slot, count) -> Experimental:
    s = acc.stats(0)[first_slot + 1:first_slot + count + 1]
    n = s[:, k.COUNT]
    with np.errstate(invalid="ignore", divide="ignore"):
        return Experimental(np.where(n > 0, s[:, k.SUM_D] / n, np.nan),
                            np.where(n > 0, s[:, k.SUM_SQ] / (2 * n), np.nan), n)


def _from_replicate_sums(sums, first_slot, count, distance, replicate=0) -> Experimental:
    """A line set's variogram from ``PairIndex.run_replicates`` sums (counts, squared differences)."""
    n = sums[first_slot + 1:first_slot + count + 1, 0, replicate]
    with np.errstate(invalid="ignore", divide="ignore"):
        g = np.where(n > 0, sums[first_slot + 1:first_slot + count + 1, 1, replicate] / (2 * n), np.nan)
    return Experimental(distance, g, n)


def directional_experimentals(acc) -> list[Experimental]:
    plan = acc.plan
    bins = plan.directional_bins
    return [_line_sets(acc, plan.layout[k.L_DIR_SLOT] + s * (bins.count + 1), bins.count)
            for s in range(len(plan.sets.directions))]


def downhole_experimental(acc) -> Experimental:
    return _line_sets(acc, acc.plan.layout[k.L_DH_SLOT], acc.plan.sets.downhole.count)


def continuity_scores(experimentals, variance, min_pairs) -> np.ndarray:
    """Mean gamma over the lags divided by the variance (lower: more continuous; NaN: under three
    supported lags). A lag without support between supported ones is filled from its neighbours; a lag
    beyond the last supported one counts at the variance or the last value, whichever is higher (no pair
    shows continuity there), and one before the first supported lag at the first value: a direction whose
    pairs are all short must not look continuous for it."""
    out = np.full(len(experimentals), np.nan)
    for s, ex in enumerate(experimentals):
        ok = ex.supported(min_pairs)
        if ok.sum() < 3:
            continue
        lags = np.arange(len(ex.gamma))
        last = int(np.flatnonzero(ok)[-1])
        filled = np.interp(lags, lags[ok], ex.gamma[ok])
        filled[last + 1:] = max(float(variance), float(ex.gamma[last]))
        out[s] = filled.mean() / variance
    return out


def smooth_on_sphere(u, scores, weights, radius_deg) -> np.ndarray:
    """Weighted mean of axial scores within ``radius_deg`` of each direction."""
    cos = np.abs(u @ u.T)
    near = cos >= math.cos(math.radians(radius_deg))
    ok = np.isfinite(scores)
    w = near * (ok * weights)[None, :]
    with np.errstate(invalid="ignore", divide="ignore"):
        out = (w @ np.where(ok, scores, 0.0)) / w.sum(axis=1)
    out[~ok] = np.nan
    return out


# ------------------------------------------------------------------------------------------------
# least squares on lag vectors
# ------------------------------------------------------------------------------------------------


def _rotation(rotvec) -> np.ndarray:
    from scipy.spatial.transform import Rotation

    return Rotation.from_rotvec(rotvec).as_matrix()


def _unpack(p, n_struct, shape, axes0, nugget, fit_rotation, unit=1.0):
    """Parameters: the nugget when ``nugget`` is None; per structure (sill, major range,
    semi/major, minor/semi); then a rotation vector when ``fit_rotation``. Nugget and sills are in
    ``unit`` (the scale of the values' variogram), so that every parameter is of order one."""
    structures = []
    at = 0
    if nugget is None:
        nugget, at = p[0] * unit, 1
    for s in range(n_struct):
        sill, a, q1, q2 = p[at + 4 * s:at + 4 * s + 4]
        structures.append(Structure(shape, sill * unit, (a, a * q1, a * q1 * q2)))
    axes = axes0
    if fit_rotation:
        axes = axes0 @ _rotation(p[at + 4 * n_struct:at + 4 * n_struct + 3]).T
    return Model(nugget, structures, axes)


def fit_lag_vectors(h, gamma, weight, nugget, axes0, n_struct, shape, start, fit_rotation=False, max_range=None,
                    nugget_start=None, tolerance=1e-8, along=None):
    """Weighted least squares of a model on experimental values at lag vectors ``h`` (m, 3).

    ``nugget``: fixed, or None to fit it from ``nugget_start``. ``start``: per structure (sill,
    major, semi, minor), ranges in metres. Bounds: sills and nugget >= 0, ranges major >= semi-major
    >= minor > 0 (as ratios in [0.02, 1]), rotation within 0.6 radian of ``axes0``; ``tolerance``
    of scipy's least_squares (x, f and gradient). ``along``: (rows, direction, length) for rows that
    are down-hole lags between composites of ``length`` along a unit ``direction``: the model is
    compared with them regularised over the composites (regularised_values). Returns (model,
    weighted residual sum of squares, residuals)."""
    from scipy.optimize import least_squares

    h = np.asarray(h, dtype=np.float64)
    gamma = np.asarray(gamma, dtype=np.float64)
    # sills and residuals in units of the values' own scale, so that the fit is the same whatever the
    # grade's unit (g/t or kg/t): the solver's finite-difference steps and tolerances are not relative
    # for parameters below one, and every constant below is relative to the scale
    scale = max(float(np.mean(np.abs(gamma))), np.finfo(np.float64).tiny)
    sw = np.sqrt(np.asarray(weight, dtype=np.float64)) / scale
    x0, lo, hi = [], [], []
    if nugget is None:
        x0, lo, hi = [max(float(nugget_start or 0.0), 0.0) / scale], [0.0], [np.inf]
    top = max_range if max_range else 10 * max(s[1] for s in start)
    for sill, a, b, c in start:
        q1 = min(max(b / a, 0.02), 1.0)
        q2 = min(max(c / b, 0.02), 1.0)
        x0 += [max(sill / scale, 1e-9), min(max(a, 1e-3), top), q1, q2]
        lo += [0.0, 1e-3, 0.02, 0.02]
        hi += [np.inf, top, 1.0, 1.0]
    if fit_rotation:
        x0 += [0.0, 0.0, 0.0]
        lo += [-0.6, -0.6, -0.6]
        hi += [0.6, 0.6, 0.6]

    def residual(p):
        m = _unpack(p, n_struct, shape, axes0, nugget, fit_rotation, scale)
        return sw * (_fitted_values(m, h, along) - gamma)

    result = least_squares(residual, np.array(x0), bounds=(np.array(lo), np.array(hi)), x_scale="jac",
                           max_nfev=100 * len(x0), xtol=tolerance, ftol=tolerance, gtol=tolerance)
    model = _unpack(result.x, n_struct, shape, axes0, nugget, fit_rotation, scale)
    r = _fitted_values(model, h, along) - gamma
    return model, float(np.sum(weight * r * r)), r


def _fitted_values(model, h, along=None) -> np.ndarray:
    """The model at the rows of lag vectors ``h`` (_model_values), ``along``'s down-hole rows
    regularised over the composites (regularised_values)."""
    out = _model_values(model, h)
    if along is not None:
        rows, direction, length = along
        out[rows] = regularised_values(model, direction, _row_lengths(h[rows]), length)
    return out


def _row_lengths(h) -> np.ndarray:
    """The separation of each row of lag vectors ((m, 3), or (m, K, 3): its first vector)."""
    h = np.asarray(h, dtype=np.float64)
    return np.linalg.norm(h if h.ndim == 2 else h[:, 0, :], axis=1)


def regularised_values(model: Model, direction, distance, length: float) -> np.ndarray:
    """The model between two composites of ``length`` metres whose centres lie ``distance`` apart along
    a unit ``direction``: nugget + sum of sill x [gbar(v, v_h) - gbar(v, v)] (Journel and Huijbregts,
    1978, ch. II), each structure along the line at its range in that direction. The nugget is the
    model's (already at composite support)."""
    from .nugget import regularised_increment

    u = np.asarray(direction, dtype=np.float64)
    d = np.asarray(distance, dtype=np.float64)
    out = np.full(d.shape, float(model.nugget))
    for s in model.structures:
        a = 1.0 / np.linalg.norm((model.axes @ u) / np.asarray(s.ranges_m, dtype=np.float64))
        out += s.sill * regularised_increment(s.shape, a, d, length, length)
    return out


def _model_values(model, h):
    """The model at lag vectors (m, 3), or its mean over the K lag vectors of each row (m, K, 3):
    the directional cone of an experimental value."""
    if h.ndim == 2:
        return model.gamma(h)
    return model.gamma(h.reshape(-1, 3)).reshape(h.shape[:2]).mean(axis=1)


def cone_directions(axis, tolerance_deg, rings: int = 3, per_ring: int = 8) -> np.ndarray:
    """Unit vectors spread evenly over the cone of half-angle ``tolerance_deg`` about ``axis``: the
    axis itself is the centre of ``rings`` rings of equal solid angle with ``per_ring`` directions
    each (every direction stands for the same share of the cone)."""
    axis, e1, e2 = _frame(axis)
    cos_a = math.cos(math.radians(tolerance_deg))
    out = []
    for j in range(rings):
        c = 1.0 - (1.0 - cos_a) * (j + 0.5) / rings
        s_ = math.sqrt(max(0.0, 1.0 - c * c))
        for q in range(per_ring):
            phi = 2.0 * math.pi * (q + 0.5 * (j % 2)) / per_ring
            out.append(c * axis + s_ * (math.cos(phi) * e1 + math.sin(phi) * e2))
    return np.array(out)


def pair_directions(acc, first_slot: int, count: int, axis, tolerance_deg: float, rings: int = 3,
                    per_ring: int = 8) -> np.ndarray:
    """Per lag bin of a directional set, ``rings * per_ring`` unit vectors spread about the bin's
    dominant pair direction as its pairs are. ``acc`` is a pass whose three values are the points'
    east, north and up: its sums of squared and crossed differences are, per bin, the second moments
    of the pairs' lag vectors (sign-free). With eigenvalues l1 >= l2 >= l3 and vectors e1, e2, e3,
    the vectors are e1 + r (sqrt(l2 / l1) cos(phi) e2 + sqrt(l3 / l1) sin(phi) e3), normalised, on rings
    whose mean r^2 is 2, so that their transverse second moments match the pairs'. A bin with fewer
    than 3 pairs falls back to the cone's even spread (cone_directions)."""
    slots = np.arange(first_slot + 1, first_slot + count + 1)
    n = acc.stats(0)[slots, k.COUNT]
    m = np.zeros((count, 3, 3))
    for a in range(3):
        m[:, a, a] = acc.stats(a)[slots, k.SUM_SQ]
    for a, b in ((0, 1), (0, 2), (1, 2)):
        m[:, a, b] = m[:, b, a] = acc.cross(a, b)[1][slots]
    axis = np.asarray(axis, dtype=np.float64)
    even = cone_directions(axis, tolerance_deg, rings, per_ring)
    out = np.repeat(even[None, :, :], count, axis=0)
    radius = np.sqrt(4.0 * (np.arange(rings) + 0.5) / rings)
    for b in range(count):
        if n[b] < 3:
            continue
        values, vectors = np.linalg.eigh(m[b] / n[b])
        l1, l2, l3 = values[2], values[1], values[0]
        if not l1 > 0:
            continue
        e1, e2, e3 = vectors[:, 2], vectors[:, 1], vectors[:, 0]
        if e1 @ axis < 0:
            e1 = -e1
        q2, q3 = math.sqrt(max(l2, 0.0) / l1), math.sqrt(max(l3, 0.0) / l1)
        pts = []
        for j in range(rings):
            for q in range(per_ring):
                phi = 2.0 * math.pi * (q + 0.5 * (j % 2)) / per_ring
                v = e1 + radius[j] * (q2 * math.cos(phi) * e2 + q3 * math.sin(phi) * e3)
                pts.append(v / np.linalg.norm(v))
        out[b] = np.array(pts)
    return out


def _principal_data(experimentals, axes, min_pairs, tolerance_deg=None):
    """Lag vectors, values, weights and axis of every supported lag. With ``tolerance_deg`` each
    lag's vectors span its directional cone (m, K, 3), so that the model is compared with what the
    cone holds: pairs up to the tolerance off the axis, where the ranges are shorter (or longer)."""
    h, g, w, which = [], [], [], []
    for a, ex in enumerate(experimentals):
        ok = ex.supported(min_pairs) & (ex.distance > 0)
        if ex.vectors is not None:
            h.append(ex.distance[ok, None, None] * ex.vectors[ok])
        elif tolerance_deg:
            h.append(ex.distance[ok, None, None] * cone_directions(axes[a], tolerance_deg)[None, :, :])
        else:
            h.append(ex.distance[ok, None] * axes[a][None, :])
        g.append(ex.gamma[ok])
        w.append(ex.pairs[ok] / ex.distance[ok])
        which.append(np.full(ok.sum(), a))
    w = np.concatenate(w)
    return np.concatenate(h), np.concatenate(g), w / w.mean(), np.concatenate(which)


def hole_directions(xyz, hole, count: int = 24) -> np.ndarray:
    """Unit vectors (count, 3) down the holes, each from a hole's shallowest to its deepest composite
    (holes spread evenly over the sorted ids, repeated when there are fewer than ``count``)."""
    v = hole_vectors(xyz, hole)
    if len(v) == 0:
        return np.tile([0.0, 0.0, -1.0], (count, 1))
    pick = np.linspace(0, len(v) - 1, count).round().astype(np.int64)
    return v[pick]


def _downhole_data(downhole: Experimental, directions, min_pairs, total_weight, cone: bool):
    """The down-hole variogram's supported lags as lag vectors along the holes (m, K, 3), over the
    holes' ``directions`` (K, 3), or along their mean direction (m, 3) without ``cone``; values, and
    weights pairs / distance scaled to sum to ``total_weight``."""
    ok = downhole.supported(min_pairs) & (downhole.distance > 0)
    d = downhole.distance[ok]
    if cone:
        h = d[:, None, None] * directions[None, :, :]
    else:
        h = d[:, None] * _mean_direction(directions)[None, :]
    w = downhole.pairs[ok] / d
    w = w * (total_weight / w.sum()) if w.sum() > 0 else w
    return h, downhole.gamma[ok], w


def _starts(experimentals, variance, nugget, n_struct, reach):
    """Starting sills and ranges: where each principal variogram first reaches 90% of the sill."""
    ranges = []
    target = nugget + 0.9 * max(variance - nugget, 1e-12 * variance)
    for ex in experimentals:
        ok = np.isfinite(ex.gamma) & (ex.pairs > 0)
        over = np.flatnonzero(ok & (ex.gamma >= target))
        ranges.append(float(ex.distance[over[0]]) if len(over) else reach)
    ranges = sorted([max(r, 1e-3) for r in ranges], reverse=True)
    part = max(variance - nugget, 1e-12 * variance)
    if n_struct == 1:
        return [[(part, *ranges)]]
    return [[(part / 2, *(r * f for r in ranges)), (part / 2, *ranges)] for f in (0.2, 0.4)]


def _fit_rows(experimentals, axes, options: FitOptions, downhole=None, directions=None):
    """The rows of the final fit: lag vectors (m, K, 3) or (m, 3), values, weights, set of each row
    (0-2 the principal axes, 3 down the holes) and pairs of each row. (The down-hole rows are compared
    with the model regularised over the composites: see ``_along``.)"""
    h, g, w, which = _principal_data(experimentals, axes, options.min_pairs, options.principal_tolerance_deg)
    n = np.concatenate([ex.pairs[ex.supported(options.min_pairs) & (ex.distance > 0)] for ex in experimentals])
    if downhole is not None and len(g):
        hd, gd, wd = _downhole_data(downhole, directions, options.min_pairs, w.sum() / 3.0,
                                    bool(options.principal_tolerance_deg))
        h, g, w = np.concatenate([h, hd]), np.concatenate([g, gd]), np.concatenate([w, wd])
        which = np.concatenate([which, np.full(len(gd), 3)])
        n = np.concatenate([n, downhole.pairs[downhole.supported(options.min_pairs) & (downhole.distance > 0)]])
    return h, g, w, which, n


def _along(which, directions, support_m):
    """fit_lag_vectors' ``along`` for the down-hole rows (set 3): their rows, the holes' mean
    direction and the composite length; None without a support length or down-hole rows."""
    rows = np.flatnonzero(np.asarray(which) == 3)
    if not support_m or len(rows) == 0 or directions is None:
        return None
    return rows, _mean_direction(directions), float(support_m)


def _mean_direction(directions) -> np.ndarray:
    """The unit mean of the holes' directions (K, 3)."""
    mean = np.asarray(directions, dtype=np.float64).mean(axis=0)
    return mean / max(np.linalg.norm(mean), 1e-12)


def cressie_score(model: Model, h, gamma, pairs, along=None) -> float:
    """Sum of N (gamma - model)^2 / model^2 over rows, over the sum of N: the weighted criterion of
    Cressie ("Fitting variogram models by weighted least squares", Math. Geology 17(5), 1985), the
    model compared with each row over its cone (and, for ``along``'s rows, regularised)."""
    fitted = _fitted_values(model, h, along)
    floor = 1e-3 * max(float(np.mean(np.abs(gamma))), np.finfo(np.float64).tiny)
    ok = np.isfinite(gamma) & (pairs > 0)
    return float(np.sum(pairs[ok] * ((gamma[ok] - fitted[ok]) / np.maximum(fitted[ok], floor)) ** 2)
                 / max(pairs[ok].sum(), 1.0))


def choose_and_fit(experimentals, axes, variance, nugget, options: FitOptions, reach, downhole=None,
                   directions=None, folds=None, data_axes=None, support_m=None):
    """The final joint fit on the three principal variograms (and the down-hole variogram along the
    holes' ``directions``, when given) for each candidate (structure count, shape). The choice: with
    ``folds`` (pairs of (principal, down-hole) experimentals without and with each group of holes),
    by cross-validation: each candidate refitted without a group and scored on the pairs that hold it
    by Cressie's criterion; the fewest structures whose score is within one standard error of the
    best (the one-standard-error rule: Hastie, Tibshirani and Friedman, *The Elements of Statistical
    Learning*, 2009, section 7.10; common practice); among shapes of one count, the lowest score.
    Without folds, by BIC on the weighted residuals. ``data_axes``: the axes the principal variograms
    were computed along, when not ``axes`` (the model's). ``support_m``: the composites' length, to
    compare the down-hole lags with the model regularised over them. Returns (model, table of
    candidates, residual rows)."""
    h, g, w, which, _ = _fit_rows(experimentals, axes if data_axes is None else data_axes, options, downhole,
                                  directions)
    if len(g) < 4:
        raise FitError("fewer than four supported lags along the principal directions: too few pairs to fit. "
                       "Check --lag and --lags against the drill spacing: the lags must hold pairs of several holes.")
    counts = (1, 2) if options.structures == "auto" else (int(options.structures),)
    candidates = []
    for n_struct in counts:
        for shape in options.shapes:
            best = None
            for start in _starts(experimentals, variance, nugget, n_struct, reach):
                model, wrss, r = fit_lag_vectors(h, g, w, nugget, axes, n_struct, shape, start, max_range=reach,
                                                 along=_along(which, directions, support_m))
                if best is None or wrss < best[1]:
                    best = (model, wrss, r)
            n = len(g)
            bic = n * math.log(max(best[1], 1e-300) / n) + 4 * n_struct * math.log(n)
            candidates.append({"structures": n_struct, "shape": shape, "weighted_rss": best[1], "bic": bic,
                               "model": best[0], "residuals": best[2]})
    if folds and len(candidates) > 1:
        for c in candidates:
            scores = []
            start = [(s.sill, *s.ranges_m) for s in c["model"].structures]
            for (train, train_dh), (test, test_dh) in folds:
                ht, gt, wt, wh, _ = _fit_rows(train, axes, options, train_dh, directions)
                hv, gv, _, wv, nv = _fit_rows(test, axes, options, test_dh, directions)
                if len(gt) < 4 or len(gv) == 0:
                    continue
                try:
                    fitted, _, _ = fit_lag_vectors(ht, gt, wt, nugget, axes, c["structures"], c["shape"], start,
                                                   max_range=reach, tolerance=1e-6,
                                                   along=_along(wh, directions, support_m))
                except (ValueError, np.linalg.LinAlgError):
                    fitted = c["model"]
                scores.append(cressie_score(fitted, hv, gv, nv, _along(wv, directions, support_m)))
            c["cv_score"] = float(np.sum(scores)) if scores else float("nan")
            c["cv_se"] = float(np.std(scores, ddof=1) * math.sqrt(len(scores))) if len(scores) > 1 else 0.0
        scored = [c for c in candidates if np.isfinite(c["cv_score"])]
        if scored:
            top = min(scored, key=lambda c: c["cv_score"])
            within = [c for c in scored if c["cv_score"] <= top["cv_score"] + top["cv_se"]]
            fewest = min(c["structures"] for c in within)
            chosen = min((c for c in scored if c["structures"] == fewest), key=lambda c: c["cv_score"])
        else:
            chosen = min(candidates, key=lambda c: c["bic"])
    else:
        chosen = min(candidates, key=lambda c: c["bic"])
    names = AXIS_NAMES + ("down_hole",)
    residuals = [{"axis": names[a], "distance": float(np.linalg.norm(hv[0] if hv.ndim == 2 else hv)),
                  "gamma": float(gv), "model": float(gv + rv), "residual": float(rv)}
                 for a, hv, gv, rv in zip(which, h, g, chosen["residuals"])]
    table = [{k2: v for k2, v in c.items() if k2 not in ("model", "residuals")} for c in candidates]
    for row, c in zip(table, candidates):
        row["chosen"] = c is chosen
    return chosen["model"], table, residuals


# ------------------------------------------------------------------------------------------------
# the whole fit
# ------------------------------------------------------------------------------------------------


@dataclass
class FitResult:
    model: Model
    variance: float
    nugget_downhole: float
    pairs_used: int
    lag_m: float
    search: dict
    candidates: list
    residuals: list
    principal: list  # Experimental along major, semi-major, minor
    downhole: Experimental
    bootstrap: dict | None = None
    warnings: list = field(default_factory=list)  # sentences for the user: what the fit could not resolve
    nugget_estimate: object = None  # engine.nugget.NuggetEstimate: how the nugget was found
    fixed: dict | None = None  # what the user fixed (model_json says what was fixed and what was fitted)


def default_lag(xyz, hole, composite_length):
    """Half the median distance from each hole's middle to the nearest other hole's middle, at least
    twice the composite length."""
    from scipy.spatial import cKDTree

    ids = np.unique(hole)
    mids = np.array([xyz[hole == h].mean(axis=0) for h in ids]) if len(ids) > 1 else xyz[:1]
    spacing = 0.0
    if len(mids) > 1:
        d, _ = cKDTree(mids).query(mids, k=2)
        spacing = float(np.median(d[:, 1]))
    extent = float(np.max(xyz.max(axis=0) - xyz.min(axis=0)))
    lag = max(0.5 * spacing, 2.0 * (composite_length or 0.0), extent / 60.0, 1e-3)
    return float(np.round(lag, 1) if lag >= 1 else lag)


class VariogramFitter:
    """Find the principal directions and fit the model of one variable.

    Parameters
    ----------
    options : FitOptions

    ``fit(xyz, values, hole, depth, composite_length)`` returns the fitter with ``result_`` (a
    FitResult). A worked call on a synthetic program with a known truth is
    ``synthetic_holes.recovery.recover``; tests/engine/test_fit.py checks it over ten seeds.
    """

    def __init__(self, options: FitOptions | None = None):
        self.options = options or FitOptions()

    def fit(self, xyz, values, hole, depth, composite_length=None, progress=None, ends=None, samples=None,
            effective_samples=None, weights=None):
        """``ends``: from and to of each composite (n, 2), metres (default: the mid-depth plus or minus
        half the composite length); ``samples``: the samples behind the composites (an
        ``engine.nugget.Intervals`` with the composites' hole numbers) and ``effective_samples``: each
        composite's effective number of samples, to find the nugget at sample support and carry it
        to the composites' (docs/methods.md, "Nugget"); without them the composites' own down-hole
        variogram, fitted with shapes averaged over the composites, gives it. ``weights``: declustering
        weights (engine/decluster.py): the variance the sill is compared with is theirs."""
        from .nugget import Intervals, NuggetFit

        o = self.options
        xyz = np.ascontiguousarray(xyz, dtype=np.float64)
        values = np.asarray(values, dtype=np.float64)
        hole = np.asarray(hole, dtype=np.int64)
        depth = np.asarray(depth, dtype=np.float64)
        keep = np.isfinite(values) & np.isfinite(xyz).all(axis=1)
        half = 0.5 * (composite_length if composite_length and composite_length > 0 else 1.0)
        ends = np.c_[depth - half, depth + half] if ends is None else np.asarray(ends, dtype=np.float64)
        ends = ends[keep]
        if effective_samples is not None:
            effective_samples = np.asarray(effective_samples, dtype=np.float64)[keep]
        if weights is not None:
            weights = np.asarray(weights, dtype=np.float64)[keep]
        xyz, values, hole, depth = xyz[keep], values[keep], hole[keep], depth[keep]
        if len(values) < 10:
            raise FitError(f"{len(values)} composites with a value: too few to fit a variogram.")
        variance = float(np.var(values, ddof=1))
        if not variance > 0:
            raise FitError("the values do not vary: there is no variogram to fit.")
        if weights is not None and np.all(weights > 0):
            from .decluster import weighted_stats

            variance = weighted_stats(values, weights)[1]
        step = progress or (lambda name: None)
        lag = o.lag_m or default_lag(xyz, hole, composite_length)
        bins = LagBins(lag, o.lags)
        reach = bins.reach_m
        dh_lag = composite_length if composite_length and composite_length > 0 else lag / 4
        downhole_bins = LagBins(dh_lag, max(4, int(math.ceil(min(reach, 10 * dh_lag) / dh_lag))))
        index = PairIndex(xyz, hole, depth, max_distance_m=max(reach, downhole_bins.reach_m))
        self.index_ = index

        # 1: the nugget, from the samples' (or the composites') down-hole variogram with regularised shapes
        step("the nugget down the holes")
        if samples is not None and effective_samples is not None:
            self.nugget_fit_ = NuggetFit(samples, effective_samples, o.min_pairs)
        else:
            self.nugget_fit_ = NuggetFit(Intervals(hole, ends[:, 0], ends[:, 1], values), None, o.min_pairs)
        self.nugget_ = self.nugget_fit_.estimate()
        self.notes_ = [] if self.nugget_.sample is not None or o.nugget is not None else [
            "The nugget comes from the composites' own down-hole variogram, not the samples' (fit reads composites "
            "only; with --transform or --detrend the values fitted are not the samples'): a structure whose range "
            "along the holes is a few composites long can take up part of it. drillaxis run on the untransformed "
            "values fits it at sample support and carries it to the composites'."]
        nugget = min(self.nugget_.composite, 0.95 * variance) if o.nugget is None else float(o.nugget)
        directions = hole_directions(xyz, hole)
        if o.axes is not None:
            return self._fit_on_fixed_axes(xyz, values, hole, depth, index, variance, bins, downhole_bins, nugget,
                                           directions, lag, step)

        # 2: the global search; a light pass (pair counts and squared differences only)
        step("searching directions")
        u = fibonacci_directions(o.search_directions)
        search_ex = self._light_pass(values, index, u, bins)
        scores = continuity_scores(search_ex, variance, o.min_pairs)
        support = np.array([ex.pairs.sum() for ex in search_ex])
        if not np.isfinite(scores).any():
            raise FitError("no search direction has three lags with enough pairs: too few composites or "
                           "lags that do not match the drill spacing. Check --lag and --lags: the lags must reach "
                           "across several holes and hold pairs.")
        smooth = smooth_on_sphere(u, scores, np.sqrt(support), o.smoothing_deg)
        major = u[int(np.nanargmin(smooth))]

        # 3: the semi-major axis in the plane normal to the major
        step("fanning about the major axis")
        fan_u = perpendicular_fan(major, o.fan_directions)
        fan_ex = self._light_pass(values, index, fan_u, bins)
        fan_scores = continuity_scores(fan_ex, variance, o.min_pairs)
        if not np.isfinite(fan_scores).any():
            raise FitError("no direction across the major axis has enough pairs to choose the semi-major axis.")
        fan_support = np.array([ex.pairs.sum() for ex in fan_ex])
        fan_smooth = smooth_on_sphere(fan_u, fan_scores, np.sqrt(fan_support), o.smoothing_deg)
        semi = fan_u[int(np.nanargmin(fan_smooth))]
        axes0 = orientation_axes(major, semi)

        # 4-5: principal fit, refinement on the volume, final fit (the nugget held)
        step("refining the axes on the variogram volume")
        model, principal, downhole = self._refine(xyz, values, hole, depth, index, axes0, variance, bins,
                                                  downhole_bins, nugget, directions)
        step("fitting the model")
        search = {"directions": int(len(u)), "tolerance_deg": o.search_tolerance_deg,
                  "best_score": float(np.nanmin(smooth)), "worst_score": float(np.nanmax(smooth)),
                  "initial_axes": axes0.tolist(), "fan_directions": int(len(fan_u))}
        return self._finish(xyz, values, hole, depth, index, model.axes, principal, downhole, variance, bins,
                            downhole_bins, nugget, directions, lag, search, step)

    def _finish(self, xyz, values, hole, depth, index, axes, principal, downhole, variance, bins, downhole_bins,
                nugget, directions, lag, search, step):
        """Step 5 (the final fit along ``axes`` and the choice of structures) and 6 (the bootstrap)."""
        o = self.options
        reach = bins.reach_m
        several = (2 if o.structures == "auto" else 1) * len(o.shapes) > 1
        folds = self._folds(values, hole, index, axes, bins, downhole_bins, principal, downhole) if several else None
        final, candidates, residuals = choose_and_fit(principal, axes, variance, nugget, o, reach, downhole,
                                                      directions, folds, support_m=float(downhole_bins.lag_m))
        result = FitResult(final, variance, nugget, int(sum(ex.pairs.sum() for ex in principal)), lag, search,
                           candidates, residuals, principal, downhole,
                           warnings=self.notes_ + unresolved_ranges(final, xyz, reach)
                           + short_of_the_data(final, principal, downhole, directions, o.min_pairs),
                           nugget_estimate=self.nugget_, fixed=self._fixed())
        if o.bootstrap > 0:
            step(f"bootstrap of {o.bootstrap} replicates")
            result.bootstrap = self._bootstrap(xyz, values, hole, depth, index, result, bins, downhole_bins, directions)
        self.result_ = result
        return self

    def _with_pair_directions(self, xyz, index, axes, bins, principal):
        """The principal variograms with, per lag, vectors spread as the lag's pairs are (one pass whose
        values are the coordinates; see pair_directions)."""
        o = self.options
        sets = Sets(directions=[_direction(a, o.principal_tolerance_deg) for a in axes], directional_bins=bins)
        acc = accumulate(xyz, xyz - xyz.mean(axis=0), sets, index=index, threads=o.threads)
        width = bins.count + 1
        first = acc.plan.layout[k.L_DIR_SLOT]
        return [Experimental(ex.distance, ex.gamma, ex.pairs,
                             pair_directions(acc, first + a * width, bins.count, axes[a], o.principal_tolerance_deg))
                for a, ex in enumerate(principal)]

    def _folds(self, values, hole, index, axes, bins, downhole_bins, principal, downhole):
        """For the choice of structures: the holes dealt at random (seeded) into CV_GROUPS groups; per
        group, the principal and down-hole variograms without it (one replicate pass) and of the pairs
        that hold it (all pairs less those). A list of ((train, train down-hole), (test, test
        down-hole))."""
        o = self.options
        ids, code = np.unique(hole, return_inverse=True)
        groups = min(CV_GROUPS, len(ids))
        if groups < 2:
            return None
        group_of_hole = np.random.default_rng(o.seed).permutation(len(ids)) % groups
        weights = np.ones((len(values), groups))
        weights[np.arange(len(values)), group_of_hole[code]] = 0.0
        sets = Sets(directions=[_direction(a, o.principal_tolerance_deg) for a in axes], directional_bins=bins,
                    downhole=downhole_bins, max_distance_m=max(bins.reach_m, downhole_bins.reach_m))
        plan = sets.plan()
        sums = index.run_replicates(values, plan, weights, threads=o.threads)
        width = bins.count + 1
        firsts = [plan.layout[k.L_DIR_SLOT] + a * width for a in range(3)]

        def apart(full, train):
            n = full.pairs - train.pairs
            with np.errstate(invalid="ignore", divide="ignore"):
                g = np.where(n > 0, (full.pairs * np.nan_to_num(full.gamma) - train.pairs * np.nan_to_num(train.gamma))
                             / n, np.nan)
            return Experimental(full.distance, g, n, full.vectors)

        out = []
        for r in range(groups):
            train = [_with_vectors(_from_replicate_sums(sums, f, bins.count, ex.distance, r), ex.vectors)
                     for f, ex in zip(firsts, principal)]
            train_dh = _from_replicate_sums(sums, plan.layout[k.L_DH_SLOT], downhole_bins.count, downhole.distance, r)
            test = [apart(f, t) for f, t in zip(principal, train)]
            out.append(((train, train_dh), (test, apart(downhole, train_dh))))
        return out

    def _light_pass(self, values, index, directions, bins):
        """Directional variograms (lag-bin centres as distances) from pair counts and squared
        differences only: the replicate kernel with one replicate of unit weights."""
        sets = Sets(directions=[_direction(v, self.options.search_tolerance_deg) for v in directions],
                    directional_bins=bins)
        plan = sets.plan()
        sums = index.run_replicates(values, plan, np.ones((index.point_count, 1)), threads=self.options.threads)
        centres = np.arange(1, bins.count + 1) * bins.lag_m
        return [_from_replicate_sums(sums, plan.layout[k.L_DIR_SLOT] + s * (bins.count + 1), bins.count, centres)
                for s in range(len(directions))]

    def _principal_pass(self, xyz, values, hole, depth, index, axes, bins, weights=None, volume=None,
                        downhole=None):
        sets = Sets(directions=[_direction(a, self.options.principal_tolerance_deg) for a in axes],
                    directional_bins=bins, volume=volume, downhole=downhole,
                    max_distance_m=max(bins.reach_m, downhole.reach_m if downhole else 0.0) if volume is not None
                    else None)
        return accumulate(xyz, values, sets, hole=hole, depth=depth, index=index, threads=self.options.threads,
                          weights=weights)

    def _fixed(self) -> dict:
        """What the user fixed: the nugget, the axes, the shapes, the number of structures."""
        o = self.options
        out = {}
        if o.nugget is not None:
            out["nugget"] = float(o.nugget)
        if o.axes is not None:
            out["axes"] = np.asarray(o.axes, dtype=np.float64).tolist()
        if tuple(o.shapes) != FitOptions.shapes:
            out["shapes"] = list(o.shapes)
        if o.structures != "auto":
            out["structures"] = int(o.structures)
        return out

    def _fit_on_fixed_axes(self, xyz, values, hole, depth, index, variance, bins, downhole_bins, nugget,
                           directions, lag, step):
        """Steps 4-6 with the axes the user fixed: no search, no rotation; sills, ranges (and the
        structures' choice) on the principal and down-hole variograms along them."""
        o = self.options
        axes = np.asarray(o.axes, dtype=np.float64)
        reach = bins.reach_m
        step("fitting the model")
        acc = self._principal_pass(xyz, values, hole, depth, index, axes, bins, None, self._volume_grid(reach),
                                   downhole_bins)
        self.volume_ = self.principal_ = acc
        principal = self._with_pair_directions(xyz, index, axes, bins, directional_experimentals(acc))
        downhole = downhole_experimental(acc)
        return self._finish(xyz, values, hole, depth, index, axes, principal, downhole, variance, bins, downhole_bins,
                            nugget, directions, lag, {"axes_fixed": True}, step)

    def _refine(self, xyz, values, hole, depth, index, axes0, variance, bins, downhole_bins, nugget, directions):
        """One pass (principal directions, down the holes, the volume for the outputs): a fit on the
        principal and down-hole variograms; then rotation, sills and ranges on the variogram volume
        in the frame of the holes (engine/framevolume.py: cells one composite long along the holes,
        one lag across), from several orientations; a last pass gives the principal variograms along
        the refined axes. Returns (model, principal, down-hole)."""
        o = self.options
        reach = bins.reach_m
        volume = self._volume_grid(reach)
        acc = self._principal_pass(xyz, values, hole, depth, index, axes0, bins, None, volume, downhole_bins)
        self.volume_ = acc  # the variogram volume (and the first principal sets) for the outputs
        self.principal_ = acc
        downhole = downhole_experimental(acc)
        principal = directional_experimentals(acc)
        n_struct = 1 if o.structures == "1" else 2
        h, g, w, _ = _principal_data(principal, axes0, o.min_pairs, o.principal_tolerance_deg)
        if len(g) < 4:
            raise FitError("fewer than four supported lags along the principal directions: too few pairs.")
        hd, gd, wd = _downhole_data(downhole, directions, o.min_pairs, w.sum() / 3.0, bool(o.principal_tolerance_deg))
        h, g, w = np.concatenate([h, hd]), np.concatenate([g, gd]), np.concatenate([w, wd])
        best = None
        for start in _starts(principal, variance, nugget, n_struct, reach):
            fitted = fit_lag_vectors(h, g, w, nugget, axes0, n_struct, o.shapes[0], start, max_range=reach)
            if best is None or fitted[1] < best[1]:
                best = fitted
        first = best[0]
        # the volume in the frame of the holes: cells one composite long along them, one lag across
        frame, _ = hole_frame(xyz, hole)
        self.frame_volume_ = FrameVolume(xyz, hole, depth, frame, bins.lag_m, float(downhole_bins.lag_m), reach,
                                         o.threads)  # kept for the bootstrap's replicates
        data = self.frame_volume_.data(values).supported(o.min_pairs)
        axes = axes0
        if len(data) >= 20:
            hv, gv = data.h, data.gamma
            wv = data.pairs / np.linalg.norm(hv, axis=1)
            start = [(s.sill, *s.ranges_m) for s in first.structures]
            # from the search's axes; from them turned a quarter about the major (semi-major and minor
            # swapped) and about the minor (major and semi-major swapped); and with the minor, then the
            # major, along the holes (engine/framevolume.py). The rotation is bounded, and directions
            # without pairs at short lags (across holes wider apart than a range) mislead the search.
            # The starts are compared by their weighted residuals on the same cells.
            best = None
            for turned in swapped_axes(axes0) + start_orientations(axes0, frame)[1:]:
                refined, wrss, _ = fit_lag_vectors(hv, gv, wv / wv.mean(), nugget, turned, n_struct, o.shapes[0],
                                                   start, fit_rotation=True, max_range=reach)
                if best is None or wrss < best[1]:
                    best = (refined, wrss)
            axes = best[0].axes
            acc = self._principal_pass(xyz, values, hole, depth, index, axes, bins, downhole=downhole_bins)
            self.principal_ = acc  # along the refined axes, with the down-hole set
            principal = self._with_pair_directions(xyz, index, axes, bins, directional_experimentals(acc))
        return Model(nugget, first.structures, axes), principal, downhole

    def _bootstrap(self, xyz, values, hole, depth, index, result, bins, downhole_bins, directions):
        """All replicates' pair sums in one pass (PairIndex.run_replicates), then per replicate: the
        nugget from its samples' down-hole variogram, its axes from a fit with rotation on its
        variogram volume in the frame of the holes, and its ranges from the joint fit on its
        directional and down-hole variograms along the fitted axes, with the fitted model's
        structure count and shape."""
        o = self.options
        rng = np.random.default_rng(o.seed)
        main = result.model
        block = None if o.bootstrap_block_m == 0 else float(o.bootstrap_block_m or
                                                              0.5 * max(s.ranges_m[0] for s in main.structures))
        group = hole if block is None else _hole_blocks(xyz, hole, block)
        ids, code = np.unique(group, return_inverse=True)
        draws = rng.multinomial(len(ids), np.full(len(ids), 1.0 / len(ids)), size=o.bootstrap).T
        weights = draws[code].astype(np.float64)
        group_of_hole = np.zeros(int(hole.max()) + 1, dtype=np.int64)
        group_of_hole[hole] = code
        reach = bins.reach_m
        sets = Sets(directions=[_direction(a, o.principal_tolerance_deg) for a in main.axes], directional_bins=bins,
                    downhole=downhole_bins, max_distance_m=max(reach, downhole_bins.reach_m))
        plan = sets.plan()
        sums = index.run_replicates(values, plan, weights, threads=o.threads, group=code)
        width = bins.count + 1
        dir_first = [plan.layout[k.L_DIR_SLOT] + a * width for a in range(3)]
        dh_first = plan.layout[k.L_DH_SLOT]
        fv = self.frame_volume_ if o.axes is None else None  # the refinement's volume (no rotation when fixed)
        n_fv, s_fv = fv.replicates(values, weights, group=code) if fv is not None else (None, None)
        shape = main.structures[0].shape
        n_struct = len(main.structures)
        start = [(s.sill, *s.ranges_m) for s in main.structures]
        one = FitOptions(**{**asdict(o), "structures": str(n_struct), "shapes": (shape,)})
        angles = {name: [] for name in AXIS_NAMES}
        ranges = {name: [] for name in AXIS_NAMES}
        effective = {name: [] for name in AXIS_NAMES}
        nuggets = []
        failed = 0

        for r in range(o.bootstrap):
            try:
                used = weights[:, r] > 0
                variance = float(np.cov(values[used], aweights=weights[used, r]))
                dh = _from_replicate_sums(sums, dh_first, downhole_bins.count, result.downhole.distance, r)
                nugget = (min(self.nugget_fit_.replicate(draws[group_of_hole, r], weights[:, r]), 0.95 * variance)
                          if o.nugget is None else float(o.nugget))
                refined = main
                if o.axes is None:  # the axes vary only when they were fitted
                    data = fv.lag_vectors(n_fv[:, r], s_fv[:, r]).supported(o.min_pairs)
                    if len(data) < 20:
                        raise FitError("too few volume cells")
                    w_v = data.pairs / np.linalg.norm(data.h, axis=1)
                    refined, _, _ = fit_lag_vectors(data.h, data.gamma, w_v / w_v.mean(), nugget, main.axes, n_struct,
                                                    shape, start, fit_rotation=True, max_range=reach)
                principal = [_with_vectors(_from_replicate_sums(sums, f, bins.count, ex.distance, r), ex.vectors)
                             for f, ex in zip(dir_first, result.principal)]
                # the replicate's variograms lie along the fitted axes; its model turns with its own axes
                fitted, _, _ = choose_and_fit(principal, refined.axes, variance, nugget, one, reach, dh, directions,
                                              data_axes=main.axes, support_m=float(downhole_bins.lag_m))
            except (FitError, ValueError, np.linalg.LinAlgError):
                failed += 1
                continue
            for a, name in enumerate(AXIS_NAMES):
                cos = abs(float(refined.axes[a] @ main.axes[a]))
                angles[name].append(math.degrees(math.acos(min(1.0, cos))))
                ranges[name].append(max(s.ranges_m[a] for s in fitted.structures))
                effective[name].append(fitted.effective_range(main.axes[a]))
            nuggets.append(nugget)
        done = o.bootstrap - failed
        unit = "single holes" if block is None else f"blocks of holes whose tops share a {block:.1f} m square in plan"
        out = {"replicates": o.bootstrap, "failed": failed, "resampled": unit, "groups": int(len(ids)),
               "method": f"{unit} resampled with replacement, each weighted by its draws (copies of a group do not "
                         "pair with each other); per replicate its nugget from its samples down the holes, its axes "
                         "from a fit with rotation on its variogram volume started from the fitted axes, its ranges "
                         "from its directional and down-hole variograms along its own axes; what the user fixed "
                         "stays fixed"}
        if done >= 2:
            out["axis_angle_deg"] = {n: {"median": float(np.median(v)), "p95": float(np.percentile(v, 95))}
                                     for n, v in angles.items()}
            def interval(v):
                return {"p2_5": float(np.percentile(v, 2.5)), "median": float(np.median(v)),
                        "p97_5": float(np.percentile(v, 97.5))}

            out["range_m"] = {n: interval(v) for n, v in ranges.items()}
            out["effective_range_m"] = {n: interval(v) for n, v in effective.items()}
            out["nugget"] = interval(nuggets)
            out["samples"] = {"axis_angle_deg": {n: list(map(float, v)) for n, v in angles.items()},
                              "range_m": {n: list(map(float, v)) for n, v in ranges.items()},
                              "effective_range_m": {n: list(map(float, v)) for n, v in effective.items()},
                              "nugget": list(map(float, nuggets))}
        return out

    def _volume_grid(self, reach):
        nx, ny, nz = self.options.volume_cells
        return VolumeGrid((reach / (nx + 0.5), reach / (ny + 0.5), reach / (nz + 0.5)), (nx, ny, nz))


def _with_vectors(ex: Experimental, vectors) -> Experimental:
    return Experimental(ex.distance, ex.gamma, ex.pairs, vectors)


def _hole_blocks(xyz, hole, block_m):
    """Each point's block: holes grouped by the square of ``block_m`` in plan holding their top."""
    from .pattern import hole_ends

    tops, _ = hole_ends(xyz, hole)
    cell = np.floor((tops[:, :2] - tops[:, :2].min(axis=0)) / max(block_m, 1e-9)).astype(np.int64)
    block_of_hole = cell[:, 0] * (cell[:, 1].max() + 1) + cell[:, 1]
    _, position = np.unique(hole, return_inverse=True)
    return block_of_hole[position]


def short_of_the_data(model: Model, principal, downhole, directions, min_pairs) -> list[str]:
    """Warnings for a fitted range shorter than the first lag with pairs along its axis: the first
    supported lag of its principal variogram, or of the down-hole variogram when the axis lies within
    20 degrees of the holes' mean direction. Nothing the data hold is that close along the axis, so
    the range is not resolved."""
    out = []
    mean = directions.mean(axis=0)
    mean = mean / max(np.linalg.norm(mean), 1e-12)
    for a, name in enumerate(AXIS_NAMES):
        firsts = []
        ok = principal[a].supported(min_pairs) & (principal[a].distance > 0)
        if ok.any():
            firsts.append(float(principal[a].distance[ok].min()))
        if abs(float(model.axes[a] @ mean)) >= math.cos(math.radians(20.0)):
            ok = downhole.supported(min_pairs) & (downhole.distance > 0)
            if ok.any():
                firsts.append(float(downhole.distance[ok].min()))
        label = name.replace("_", "-")
        longest = max(s.ranges_m[a] for s in model.structures)
        if not firsts:
            out.append(f"No lag with pairs lies along the {label} axis: its range ({longest:.1f} m) is not supported "
                       "by the data.")
        elif longest < min(firsts):
            out.append(f"The {label} range ({longest:.1f} m) is shorter than the first lag with pairs along that axis "
                       f"({min(firsts):.1f} m): no pair of composites is that close along it, so the range is not "
                       "resolved.")
    return out


def unresolved_ranges(model: Model, xyz, reach_m: float) -> list[str]:
    """Warnings for ranges the data cannot show: a range at the longest lag fitted (the variogram does
    not level off within the lags: the range is a bound, not an estimate) or longer than the data reach
    along its axis."""
    out = []
    extent = np.ptp(np.asarray(xyz, dtype=np.float64) @ model.axes.T, axis=0)
    for k, s in enumerate(model.structures, 1):
        if s.ranges_m[0] >= 0.99 * reach_m:
            out.append(f"The major range of structure {k} ({s.ranges_m[0]:.1f} m) sits at the longest lag fitted "
                       f"({reach_m:.1f} m): the variogram does not level off within the lags, so the range is a bound, "
                       "not an estimate. A trend or a domain larger than the lags can do this: check stationarity, "
                       "and reach further with --lag and --lags.")
    for a, name in enumerate(AXIS_NAMES):
        longest = max(s.ranges_m[a] for s in model.structures)
        if longest > extent[a]:
            out.append(f"The {name.replace('_', '-')} range ({longest:.1f} m) is longer than the data reach along "
                       f"that axis ({extent[a]:.1f} m): no pair of composites is that far apart along it.")
    return out


def swapped_axes(axes) -> list[np.ndarray]:
    """``axes``, then the same turned a quarter about the major (semi-major and minor swapped) and
    about the minor (major and semi-major swapped), each right-handed."""
    axes = np.asarray(axes, dtype=np.float64)
    return [axes, orientation_axes(axes[0], axes[2]), orientation_axes(axes[1], axes[0])]


def orientation_axes(major, semi) -> np.ndarray:
    """Rows major, semi-major (made orthogonal to the major), minor = major x semi-major."""
    major = np.asarray(major, dtype=np.float64)
    major = major / np.linalg.norm(major)
    semi = np.asarray(semi, dtype=np.float64)
    semi = semi - (semi @ major) * major
    semi /= np.linalg.norm(semi)
    return np.stack([major, semi, np.cross(major, semi)])


def model_json(result: FitResult, variable: str, domain: str | None) -> dict:
    """``model.json`` (../shared/INTERFACE.md) with the fit diagnostics and bootstrap intervals."""
    m = result.model
    out = {"schema": "drillaxis.model/1", "variable": variable, "domain": domain, "variance": result.variance,
           "pairs_used": result.pairs_used}
    out.update(m.to_json())
    if result.nugget_estimate is not None:
        out["nugget_support"] = result.nugget_estimate.to_json()
    fixed = result.fixed or {}
    out["fit"] = {
        "fixed": fixed,
        "fitted": [p for p in ("nugget", "axes", "shapes", "structures", "sills", "ranges") if p not in fixed],
        "lag_m": result.lag_m,
        "nugget_from": result.nugget_estimate.method if result.nugget_estimate else None,
        "weights": "pairs / mean lag distance, normalised to mean 1; the down-hole lags together weigh as much as "
                   "one principal direction",
        "criterion": ("cross-validation over 5 groups of holes: each candidate refitted without a group and scored on "
                      "the pairs that hold it by sum N (gamma - model)^2 / model^2 / sum N (Cressie 1985); the fewest "
                      "structures within one standard error of the best score, then the best shape"
                      if any("cv_score" in c for c in result.candidates)
                      else "BIC = n ln(weighted RSS / n) + parameters ln n (one candidate, or too few holes to "
                           "cross-validate)"),
        "candidates": result.candidates,
        "search": result.search,
        "residuals": result.residuals,
        "problems": m.problems(),
        "warnings": result.warnings,
    }
    if result.bootstrap is not None:
        b = {key: v for key, v in result.bootstrap.items() if key != "samples"}
        out["bootstrap"] = b
    return out
