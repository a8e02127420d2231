"""Is a domain stationary enough for variography? Checks run before any fitting.

A sample variogram means something only where the local mean and variance do not drift and a single
population is present. The checks (docs/methods.md, "Stationarity", gives the rules and sources):

- ``trend``: swaths (slices) along east, north, elevation and, when given, a model's axes: count,
  mean and variance per slice, and the least-squares slope of the values along each axis. Its
  standard error allows for spatial correlation: the residuals' covariance at each separation
  (from their variogram, cut at the first distance where it reaches their variance) enters the
  exact variance of a least-squares slope, so correlated samples are not counted as independent.
  Flag: p below ``alpha`` shared over the axes (Bonferroni) and a change over the extent of at
  least ``min_trend_sd`` standard deviations.
- ``proportional_effect``: 3D moving windows (half-overlapping boxes); local standard deviation
  against local mean. Flag: correlation >= ``min_window_correlation`` with a positive slope.
- ``mixture``: one against two normal components, on log values when the values are positive and
  the logs are less skewed; compared by BIC. Flag: BIC lower by ``min_bic_drop`` with both
  components sizeable and separated (Ashman's D >= 2, or standard deviations two-fold apart).
- ``sill``: omni and east, north, vertical variograms to half the extent. Flag: the last third of the
  lags above ``sill_ratio`` times the variance, or still rising over it by ``min_tail_rise`` of the
  variance and no slower than over the middle third (a variogram without a sill).
- ``halves``: the two halves either side of the median along the longest horizontal direction:
  means, variances and omni variograms compared.

Example
-------
>>> import numpy as np
>>> rng = np.random.default_rng(0)
>>> xyz = rng.uniform(0, 400, (1500, 3))
>>> report = diagnose(xyz, 2.0 + xyz[:, 0] / 100 + rng.normal(0, 0.5, 1500))
>>> report["checks"]["trend"]["flag"], report["checks"]["trend"]["axes"][0]["name"]
(True, 'east')
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from numba import prange
from scipy import stats

from ._jit import jit_parallel
from ._jit import threads as numba_threads
from .model import AXIS_NAMES

COORDINATE_AXES = (("east", (1.0, 0.0, 0.0)), ("north", (0.0, 1.0, 0.0)), ("elevation", (0.0, 0.0, 1.0)))
CHUNKS = 16  # accumulator slices of the class-sum kernel: fixed, so sums do not depend on threads


@dataclass(frozen=True)
class StationarityOptions:
    """Settings of the checks (distances in metres). The thresholds are drillaxis's own rules of
    thumb, set on synthetic cases (docs/methods.md); they decide the flags, the figures behind them
    are always written."""

    slices: int = 10
    alpha: float = 0.01
    min_trend_sd: float = 0.25
    sample_limit: int = 4000
    variogram_sample_limit: int = 8000
    mixture_sample_limit: int = 50000
    classes: int = 40
    min_window_count: int = 20
    min_windows: int = 8
    min_window_correlation: float = 0.5
    min_bic_drop: float = 10.0
    min_component_weight: float = 0.05
    lags: int = 12
    min_pairs: int = 30
    sill_ratio: float = 1.3
    min_tail_rise: float = 0.2
    halves_mean_sd: float = 0.5
    halves_variance_ratio: float = 2.0
    halves_variogram: float = 0.5
    seed: int = 0


# --------------------------------------------------------------------------------------------
# the class-sum kernel: every pair of a (sub)sample, by distance class
# --------------------------------------------------------------------------------------------


@jit_parallel
def _class_sums(x, y, z, values, coords, width, n_classes):
    """Per distance class k (d in [k w, (k+1) w)): count, sum of d, then for each column a of
    ``values`` the sum of (v_i - v_j)^2, then for each column b of ``coords`` the sum of
    c_i c_j, over unordered pairs i < j."""
    n = x.shape[0]
    m = values.shape[1]
    q = coords.shape[1]
    cols = 2 + m + q
    acc = np.zeros((CHUNKS, n_classes, cols))
    for c in prange(CHUNKS):
        for i in range(c, n, CHUNKS):
            for j in range(i + 1, n):
                dx = x[j] - x[i]
                dy = y[j] - y[i]
                dz = z[j] - z[i]
                d = math.sqrt(dx * dx + dy * dy + dz * dz)
                k = int(d / width)
                if k >= n_classes:
                    continue
                acc[c, k, 0] += 1.0
                acc[c, k, 1] += d
                for a in range(m):
                    diff = values[i, a] - values[j, a]
                    acc[c, k, 2 + a] += diff * diff
                for b in range(q):
                    acc[c, k, 2 + m + b] += coords[i, b] * coords[j, b]
    out = np.zeros((n_classes, cols))
    for c in range(CHUNKS):
        out += acc[c]
    return out


def class_sums(xyz, values, coords, width_m: float, classes: int, threads: int | None = None) -> np.ndarray:
    """Pair sums by distance class over all pairs of ``xyz`` (see ``_class_sums``); ``values`` and
    ``coords`` are (n, m) and (n, q) arrays of finite numbers."""
    xyz = np.ascontiguousarray(xyz, dtype=np.float64).reshape(-1, 3)

    def columns(a):
        a = np.asarray(a, dtype=np.float64)
        return np.ascontiguousarray(a.reshape(len(xyz), -1) if a.ndim < 2 else a)

    values, coords = columns(values), columns(coords)
    with numba_threads(threads):
        return _class_sums(xyz[:, 0].copy(), xyz[:, 1].copy(), xyz[:, 2].copy(), values, coords,
                           float(width_m), int(classes))


# --------------------------------------------------------------------------------------------
# trend
# --------------------------------------------------------------------------------------------


def _axes_to_test(axes, coordinates=True):
    named = [(name, np.asarray(u)) for name, u in COORDINATE_AXES] if coordinates else []
    if axes is not None:
        for name, u in zip(AXIS_NAMES, np.asarray(axes, dtype=np.float64)):
            named.append((f"model {name.replace('_', '-')}", u / np.linalg.norm(u)))
    return named


def _swath(s, values, slices):
    lo, hi = float(s.min()), float(s.max())
    if hi - lo <= 0:
        return []
    edges = np.linspace(lo, hi, slices + 1)
    which = np.clip(np.searchsorted(edges, s, side="right") - 1, 0, slices - 1)
    out = []
    for k in range(slices):
        v = values[which == k]
        out.append({"from": float(edges[k]), "to": float(edges[k + 1]),
                    "centre": float(0.5 * (edges[k] + edges[k + 1])),
                    "count": int(len(v)), "mean": float(v.mean()) if len(v) else None,
                    "variance": float(v.var(ddof=1)) if len(v) > 1 else None})
    return out


def _subsample(n, limit, rng):
    if n <= limit:
        return np.arange(n)
    return np.sort(rng.choice(n, size=limit, replace=False))


def _exponential_fit(h, gamma, counts, span, min_pairs, variance):
    """Nugget, sill and practical range of an exponential model fitted to a class variogram up to
    half the span (weights: pairs); the sill is free, as a domain's variance falls short of it."""
    from scipy.optimize import least_squares

    ok = (counts >= min_pairs) & np.isfinite(gamma) & (h <= 0.5 * span)
    if ok.sum() < 3:
        return 0.0, float(variance), float(max(span, 1e-6))
    hh, gg, ww = h[ok], gamma[ok], np.sqrt(counts[ok] / counts[ok].sum())
    # nugget and sill in units of the variance, so that the fit is the same in any unit of the values
    unit = float(variance) if variance > 0 else max(float(np.nanmax(gg)), np.finfo(np.float64).tiny)
    gu = gg / unit

    def residual(p):
        return ww * (p[0] + p[1] * (1 - np.exp(-3 * hh / p[2])) - gu)

    top = 3.0 * float(np.nanmax(gu)) + 1e-12
    start = [0.1, 0.9, max(0.25 * span, hh[0] * 1.01)]
    fit = least_squares(residual, start, bounds=([0.0, 0.0, hh[0]], [top, top, 2.0 * span]))
    return float(fit.x[0] * unit), float(fit.x[1] * unit), float(fit.x[2])


def trend_check(xyz, values, axes=None, options: StationarityOptions | None = None, threads=None,
                coordinates: bool = True) -> dict:
    """Swaths and the correlation-aware slope test along east, north and elevation (unless
    ``coordinates`` is false) and along each of ``axes`` (see the module notes)."""
    o = options or StationarityOptions()
    rng = np.random.default_rng(o.seed)
    xyz = np.asarray(xyz, dtype=np.float64)
    values = np.asarray(values, dtype=np.float64)
    keep = np.isfinite(values) & np.isfinite(xyz).all(axis=1)
    xyz, values = xyz[keep], values[keep]
    named = _axes_to_test(axes, coordinates)
    # (n, q) coordinates along each axis from the centre of the composites: centred already
    s_c = np.stack([(xyz - xyz.mean(axis=0)) @ u for _, u in named], axis=1)
    z_c = values - values.mean()
    sd = float(values.std(ddof=1))
    ss = (s_c ** 2).sum(axis=0)
    with np.errstate(invalid="ignore", divide="ignore"):
        slope = np.where(ss > 0, (s_c * z_c[:, None]).sum(axis=0) / ss, 0.0)
    residual = z_c[:, None] - s_c * slope[None, :]
    sigma2 = (residual ** 2).mean(axis=0)
    n = len(values)
    sub = _subsample(n, o.sample_limit, rng)
    m = len(sub)
    span = float(np.linalg.norm(xyz[sub].max(axis=0) - xyz[sub].min(axis=0)))
    width = max(span / o.classes, 1e-9) * (1 + 1e-9)
    sums = class_sums(xyz[sub], residual[sub], s_c[sub], width, o.classes, threads)
    q = len(named)  # the number of tests too
    counts = sums[:, 0]
    scale = n * (n - 1) / (m * (m - 1)) if m > 1 else 0.0
    out_axes = []
    centres = np.where(counts > 0, sums[:, 1] / np.maximum(counts, 1), (np.arange(o.classes) + 0.5) * width)
    for a, (name, u) in enumerate(named):
        with np.errstate(invalid="ignore", divide="ignore"):
            gamma = np.where(counts > 0, sums[:, 2 + a] / (2 * counts), np.nan)
        nugget, sill, range_m = _exponential_fit(centres, gamma, counts, span, o.min_pairs, sigma2[a])
        cov = sill * np.exp(-3.0 * centres / range_m)
        cross = sums[:, 2 + q + a] * scale
        c0 = nugget + sill
        numerator = ss[a] * c0 + 2.0 * float((cross * cov).sum())
        numerator = max(numerator, ss[a] * c0 / n)  # at most n-fold less than independent
        se = math.sqrt(numerator) / ss[a] if ss[a] > 0 else math.inf
        n_eff = float(n * ss[a] * c0 / numerator) if numerator > 0 else float(n)
        n_eff = min(max(n_eff, 3.0), float(n))
        t = float(slope[a] / se) if se > 0 and math.isfinite(se) else 0.0
        p = float(2 * stats.t.sf(abs(t), max(n_eff - 2.0, 1.0)))
        extent = float(np.ptp(s_c[:, a]))
        change = float(slope[a] * extent)
        change_sd = abs(change) / sd if sd > 0 else 0.0
        flag = bool(p < o.alpha / q and change_sd >= o.min_trend_sd)
        out_axes.append({
            "name": name, "vector": [float(c) for c in u], "slope_per_100m": float(100 * slope[a]),
            "slope_standard_error_per_100m": float(100 * se), "t": t, "effective_samples": n_eff, "p": p,
            "extent_m": extent, "change_over_extent": change, "change_in_sd": change_sd,
            "residual_covariance": {"nugget": nugget, "sill": sill, "range_m": range_m, "shape": "exponential"},
            "flag": flag,
            "slices": _swath(s_c[:, a], values, o.slices),
        })
    flagged = [a for a in out_axes if a["flag"]]
    if flagged:
        parts = ", ".join(f"{a['name']} {a['slope_per_100m']:+.3g} per 100 m (p = {a['p']:.2g}, "
                          f"{a['change_in_sd']:.2f} sd over {a['extent_m']:.0f} m)" for a in flagged)
        sentence = (f"Trend in the mean along {parts}. A trend makes the variogram rise without a sill; "
                    "split the domain, or model the trend (--detrend linear|quadratic) and fit the residuals.")
    else:
        sentence = ("No trend in the mean: no axis has a slope that is both significant once spatial "
                    "correlation is allowed for and larger than "
                    f"{o.min_trend_sd:g} standard deviations over the extent.")
    return {"flag": bool(flagged), "axes": out_axes, "alpha": o.alpha, "tests": q,
            "sample_for_correlation": m, "sentence": sentence}


# --------------------------------------------------------------------------------------------
# proportional effect
# --------------------------------------------------------------------------------------------


def _window_statistics(xyz, values, divisions, min_count):
    lo = xyz.min(axis=0)
    size = (xyz.max(axis=0) - lo) / divisions
    half = np.where(size > 0, size / 2, 1.0)
    cells = 2 * divisions
    idx = np.clip(np.floor((xyz - lo) / half).astype(np.int64), 0, cells - 1)
    flat = (idx[:, 2] * cells + idx[:, 1]) * cells + idx[:, 0]
    shape = (cells, cells, cells)
    n = np.bincount(flat, minlength=cells ** 3).reshape(shape).astype(np.float64)
    s1 = np.bincount(flat, weights=values, minlength=cells ** 3).reshape(shape)
    s2 = np.bincount(flat, weights=values * values, minlength=cells ** 3).reshape(shape)

    def windows(a):  # sum over 2 x 2 x 2 half-size cells: windows stepping half their size
        return (a[:-1, :-1, :-1] + a[1:, :-1, :-1] + a[:-1, 1:, :-1] + a[:-1, :-1, 1:]
                + a[1:, 1:, :-1] + a[1:, :-1, 1:] + a[:-1, 1:, 1:] + a[1:, 1:, 1:])

    wn, w1, w2 = windows(n), windows(s1), windows(s2)
    keep = wn >= min_count
    count = wn[keep]
    mean = w1[keep] / count
    variance = np.maximum(w2[keep] - count * mean * mean, 0.0) / (count - 1)
    return count, mean, np.sqrt(variance), size


def proportional_effect_check(xyz, values, options: StationarityOptions | None = None) -> dict:
    o = options or StationarityOptions()
    for divisions in (4, 3, 2):
        count, mean, sd, size = _window_statistics(xyz, values, divisions, o.min_window_count)
        if len(count) >= o.min_windows:
            break
    result = {"windows": int(len(count)), "window_m": [float(v) for v in size],
              "min_count": o.min_window_count, "local_mean": mean.tolist(), "local_sd": sd.tolist(),
              "local_count": count.astype(int).tolist()}
    if len(count) < 3 or np.ptp(mean) == 0 or np.ptp(sd) == 0:
        return {**result, "flag": False, "correlation": None, "slope": None, "ratio_sd_to_mean": None,
                "sentence": "Too few windows with enough composites to test for a proportional effect."}
    r = float(np.corrcoef(mean, sd)[0, 1])
    slope, intercept = np.polyfit(mean, sd, 1)
    through_origin = float((mean * sd).sum() / (mean * mean).sum())
    flag = bool(len(count) >= o.min_windows and r >= o.min_window_correlation and slope > 0)
    if flag:
        sentence = (f"Proportional effect: the local standard deviation rises with the local mean (correlation "
                    f"{r:.2f}, slope {slope:.3g}, over {len(count)} windows). Consider a pairwise relative variogram, "
                    "or variography of log or normal-score values (--transform log|normal-score).")
    else:
        sentence = (f"No proportional effect: the local standard deviation does not follow the local mean "
                    f"(correlation {r:.2f} over {len(count)} windows).")
    return {**result, "flag": flag, "correlation": r, "slope": float(slope), "intercept": float(intercept),
            "ratio_sd_to_mean": through_origin, "sentence": sentence}


# --------------------------------------------------------------------------------------------
# mixtures
# --------------------------------------------------------------------------------------------


def _normal_pdf(y, mu, sd):
    return np.exp(-0.5 * ((y - mu) / sd) ** 2) / (sd * math.sqrt(2 * math.pi))


def gaussian_mixture(y, components: int = 2, iterations: int = 400, tol: float = 1e-7):
    """Maximum-likelihood mixture of normal components by EM, started from quantile splits;
    (weights, means, sds, log-likelihood) of the best start."""
    y = np.asarray(y, dtype=np.float64)
    n = len(y)
    floor = max(1e-6 * float(y.var()), 1e-300)
    if components == 1:
        mu, sd = float(y.mean()), max(float(y.std()), math.sqrt(floor))
        return np.array([1.0]), np.array([mu]), np.array([sd]), float(np.log(_normal_pdf(y, mu, sd)).sum())
    best = None
    order = np.sort(y)
    for split in (0.5, 0.85, 0.15):
        cut = order[int(split * (n - 1))]
        groups = [y[y <= cut], y[y > cut]]
        if min(len(g) for g in groups) < 2:
            continue
        w = np.array([len(g) / n for g in groups])
        mu = np.array([g.mean() for g in groups])
        sd = np.array([max(g.std(), math.sqrt(floor)) for g in groups])
        previous = -math.inf
        for _ in range(iterations):
            dens = w[None, :] * np.stack([_normal_pdf(y, mu[c], sd[c]) for c in range(2)], axis=1)
            total = np.maximum(dens.sum(axis=1), 1e-300)
            ll = float(np.log(total).sum())
            resp = dens / total[:, None]
            nk = resp.sum(axis=0)
            if (nk < 1e-9).any():
                break
            w = nk / n
            mu = (resp * y[:, None]).sum(axis=0) / nk
            sd = np.sqrt(np.maximum((resp * (y[:, None] - mu[None, :]) ** 2).sum(axis=0) / nk, floor))
            if ll - previous < tol * n:
                break
            previous = ll
        if best is None or ll > best[3]:
            order_c = np.argsort(mu)
            best = (w[order_c], mu[order_c], sd[order_c], ll)
    return best


def _skew(v):
    v = v - v.mean()
    s = v.std()
    return float((v ** 3).mean() / s ** 3) if s > 0 else 0.0


def mixture_check(values, options: StationarityOptions | None = None) -> dict:
    o = options or StationarityOptions()
    if len(values) > o.mixture_sample_limit:  # a seeded subset: the evidence is ample, EM time is not
        values = values[_subsample(len(values), o.mixture_sample_limit, np.random.default_rng(o.seed))]
    use_log = bool((values > 0).all() and abs(_skew(np.log(values))) < abs(_skew(values)))
    y = np.log(values) if use_log else values
    n = len(y)
    one = gaussian_mixture(y, 1)
    two = gaussian_mixture(y, 2) if n >= 10 else None
    bic1 = -2 * one[3] + 2 * math.log(n)
    result = {"scale": "log" if use_log else "values", "count": n, "bic_one": bic1}
    if two is None:
        return {**result, "flag": False, "sentence": "Too few composites to test for mixed populations."}
    w, mu, sd, ll = two
    bic2 = -2 * ll + 5 * math.log(n)
    separation = float(math.sqrt(2) * abs(mu[1] - mu[0]) / math.sqrt(sd[0] ** 2 + sd[1] ** 2))
    sd_ratio = float(max(sd) / min(sd))
    drop = float(bic1 - bic2)
    flag = bool(drop >= o.min_bic_drop and w.min() >= o.min_component_weight and (separation >= 2 or sd_ratio >= 2))
    grid = np.linspace(y.min(), y.max(), 2001)
    post = w[1] * _normal_pdf(grid, mu[1], sd[1])
    post = post / np.maximum(post + w[0] * _normal_pdf(grid, mu[0], sd[0]), 1e-300)
    between = (grid >= mu[0]) & (grid <= mu[1])
    if not between.any():
        between[:] = True
    cross = grid[between][np.argmin(np.abs(post[between] - 0.5))]
    split = float(math.exp(cross) if use_log else cross)
    back = (lambda v: float(math.exp(v))) if use_log else float
    result.update({
        "bic_two": float(bic2), "bic_drop": drop, "components": [
            {"weight": float(w[c]), "mean": float(mu[c]), "sd": float(sd[c]), "centre": back(mu[c])} for c in range(2)],
        "separation": separation, "sd_ratio": sd_ratio, "split_value": split,
        "share_above_split": float((values > split).mean()), "flag": flag,
    })
    if flag:
        result["sentence"] = (
            f"Two populations: a two-component mixture on {'log ' if use_log else ''}values fits better than one "
            f"(BIC lower by {drop:.0f}; weights {w[0]:.2f} and {w[1]:.2f}, centres {back(mu[0]):.3g} and "
            f"{back(mu[1]):.3g}). The split falls near {split:.3g} ({100 * result['share_above_split']:.0f}% above). "
            "Check whether they are apart in space and model them as separate domains.")
    else:
        result["sentence"] = ("One population: a two-component mixture does not fit clearly better (BIC "
                              f"{'lower' if drop >= 0 else 'higher'} by {abs(drop):.0f}, separation {separation:.2f}).")
    return result


def domain_summary(values, labels) -> list[dict]:
    """Count, mean, standard deviation, coefficient of variation and median of each domain."""
    values = np.asarray(values, dtype=np.float64)
    labels = np.asarray(labels).astype(str)
    ok = np.isfinite(values)
    table = []
    for label in sorted(set(labels[ok])):
        v = values[ok & (labels == label)]
        sd = float(v.std(ddof=1)) if len(v) > 1 else None
        table.append({"domain": label, "count": int(len(v)), "mean": float(v.mean()), "sd": sd,
                      "cv": sd / float(v.mean()) if sd is not None and v.mean() != 0 else None,
                      "median": float(np.median(v))})
    return table


# --------------------------------------------------------------------------------------------
# variograms: the sill test and the halves
# --------------------------------------------------------------------------------------------


def _variogram_sets(xyz, lags):
    from .variogram import Direction, LagBins, Sets

    extent = xyz.max(axis=0) - xyz.min(axis=0)
    reach = 0.5 * float(extent.max())
    lag = max(reach / (lags + 0.5), 1e-6)
    bins = LagBins(lag, lags)
    directions = [Direction(90.0, 0.0, 22.5), Direction(0.0, 0.0, 22.5), Direction(0.0, 90.0, 22.5)]
    return Sets(omni=bins, directions=directions, directional_bins=bins), extent


def _curves(xyz, values, hole, lags, threads):
    from .variogram import accumulate, variogram_table

    sets, extent = _variogram_sets(xyz, lags)
    table = variogram_table(accumulate(xyz, values, sets, hole=hole, threads=threads))
    names = {"": "omni", "90/0": "east", "0/0": "north", "0/90": "vertical"}
    limits = {"omni": 0.5 * float(extent.max()), "east": 0.5 * float(extent[0]), "north": 0.5 * float(extent[1]),
              "vertical": 0.5 * float(extent[2])}
    curves = {}
    for key, part in table.groupby("direction", sort=False):
        name = names.get(key, key)
        curves[name] = {"distance": part["distance"].to_numpy(),
                        "pairs": part["pairs"].to_numpy(), "gamma": part["gamma"].to_numpy(),
                        "limit_m": limits[name]}
    return curves


def _slope(h, g):
    return float(np.polyfit(h, g, 1)[0]) if len(h) >= 2 and np.ptp(h) > 0 else 0.0


def sill_check(xyz, values, hole=None, options: StationarityOptions | None = None, threads=None) -> dict:
    o = options or StationarityOptions()
    variance = float(values.var(ddof=1))
    sets = []
    for name, c in _curves(xyz, values, hole, o.lags, threads).items():
        ok = (c["pairs"] >= o.min_pairs) & np.isfinite(c["gamma"]) & (c["distance"] <= c["limit_m"])
        h, g = c["distance"][ok], c["gamma"][ok]
        entry = {"name": name, "distance": c["distance"].tolist(), "pairs": c["pairs"].tolist(),
                 "gamma": c["gamma"].tolist(), "limit_m": c["limit_m"], "lags_used": int(ok.sum())}
        if len(h) < 6:
            sets.append({**entry, "flag": False, "note": "fewer than six lags with enough pairs"})
            continue
        third = len(h) // 3
        middle, last = slice(third, 2 * third), slice(len(h) - third, len(h))
        tail_ratio = float(g[last].mean() / variance)
        slope_mid, slope_last = _slope(h[middle], g[middle]), _slope(h[last], g[last])
        tail_rise = float(slope_last * (h[last][-1] - h[last][0]) / variance)
        growing = tail_rise >= o.min_tail_rise and slope_last >= slope_mid
        flag = bool(tail_ratio >= o.sill_ratio or growing)
        sets.append({**entry, "flag": flag, "tail_ratio": tail_ratio, "tail_rise": tail_rise,
                     "slope_middle": slope_mid, "slope_last": slope_last})
    flagged = [s["name"] for s in sets if s["flag"]]
    if flagged:
        sentence = (f"Trend-like variogram ({', '.join(flagged)}): at the largest lags it rises well above the "
                    "variance or keeps rising ever faster, with no sill. Look for a trend or a mixed domain first.")
    else:
        sentence = "The variograms level off near the variance within half the extent: no sign of a trend."
    return {"flag": bool(flagged), "variance": variance, "sets": sets, "sentence": sentence}


def halves_check(xyz, values, hole=None, options: StationarityOptions | None = None, threads=None) -> dict:
    from .variogram import LagBins, Sets, accumulate, variogram_table

    o = options or StationarityOptions()
    plan_xy = xyz[:, :2] - xyz[:, :2].mean(axis=0)
    _, vectors = np.linalg.eigh(np.cov(plan_xy.T))
    axis = vectors[:, -1]
    s = plan_xy @ axis
    cut = float(np.median(s))
    parts = [s <= cut, s > cut]
    extent = xyz.max(axis=0) - xyz.min(axis=0)
    reach = 0.25 * float(extent.max())
    lag = max(reach / (o.lags + 0.5), 1e-6)
    halves = []
    for side, keep in zip(("first", "second"), parts):
        v = values[keep]
        table = variogram_table(accumulate(xyz[keep], v, Sets(omni=LagBins(lag, o.lags)),
                                           hole=None if hole is None else hole[keep], threads=threads))
        halves.append({"side": side, "count": int(keep.sum()), "mean": float(v.mean()),
                       "variance": float(v.var(ddof=1)) if len(v) > 1 else None,
                       "distance": table["distance"].tolist(), "pairs": table["pairs"].tolist(),
                       "gamma": table["gamma"].tolist()})
    a, b = halves
    pooled_sd = math.sqrt(0.5 * ((a["variance"] or 0) + (b["variance"] or 0)))
    mean_sd = abs(a["mean"] - b["mean"]) / pooled_sd if pooled_sd > 0 else 0.0
    ratio = max(a["variance"], b["variance"]) / min(a["variance"], b["variance"]) \
        if a["variance"] and b["variance"] else math.inf
    ga, gb = np.asarray(a["gamma"], dtype=float), np.asarray(b["gamma"], dtype=float)
    ok = (np.asarray(a["pairs"]) >= o.min_pairs) & (np.asarray(b["pairs"]) >= o.min_pairs)
    ok &= np.isfinite(ga) & np.isfinite(gb)
    vg = float(np.mean(np.abs(ga[ok] - gb[ok])) / np.mean(0.5 * (ga[ok] + gb[ok]))) if ok.any() else None
    reasons = []
    if mean_sd >= o.halves_mean_sd:
        reasons.append(f"means differ by {mean_sd:.2f} standard deviations")
    if ratio >= o.halves_variance_ratio:
        reasons.append(f"variances differ {ratio:.2f}-fold")
    if vg is not None and vg >= o.halves_variogram:
        reasons.append(f"variograms differ by {100 * vg:.0f}% on average")
    from .orientation import trend_plunge

    trend = trend_plunge(np.r_[axis, 0.0])[0]
    sentence = (f"The halves either side of the median along trend {trend:.0f}: "
                + ("; ".join(reasons) + "." if reasons else "similar mean, variance and variogram."))
    return {"flag": bool(reasons), "trend": float(trend), "split_at_m": cut, "halves": halves,
            "mean_difference_sd": float(mean_sd), "variance_ratio": float(ratio), "variogram_difference": vg,
            "sentence": sentence}


# --------------------------------------------------------------------------------------------
# detrending and the whole set of checks
# --------------------------------------------------------------------------------------------

TREND_TERMS = {"linear": ("1", "x", "y", "z"),
               "quadratic": ("1", "x", "y", "z", "x^2", "y^2", "z^2", "xy", "xz", "yz")}


def _design(xyz, centre, scale, kind):
    u = (xyz - centre) / scale
    x, y, z = u[:, 0], u[:, 1], u[:, 2]
    columns = {"1": np.ones(len(u)), "x": x, "y": y, "z": z, "x^2": x * x, "y^2": y * y, "z^2": z * z,
               "xy": x * y, "xz": x * z, "yz": y * z}
    return np.stack([columns[t] for t in TREND_TERMS[kind]], axis=1)


def fit_trend(xyz, values, kind: str = "linear") -> dict:
    """Least-squares polynomial trend in the coordinates, centred on their mean and in units of
    100 m (coefficients are data units per 100 m, or per 100 m squared)."""
    centre = xyz.mean(axis=0)
    design = _design(xyz, centre, 100.0, kind)
    coefficients, *_ = np.linalg.lstsq(design, values, rcond=None)
    fitted = design @ coefficients
    total = float(((values - values.mean()) ** 2).sum())
    return {"kind": kind, "terms": list(TREND_TERMS[kind]), "coefficients": coefficients.tolist(),
            "centre": centre.tolist(), "unit_m": 100.0,
            "r_squared": float(1 - ((values - fitted) ** 2).sum() / total) if total > 0 else 0.0}


def trend_values(trend: dict, xyz) -> np.ndarray:
    design = _design(np.asarray(xyz, dtype=np.float64), np.asarray(trend["centre"]), trend["unit_m"], trend["kind"])
    return design @ np.asarray(trend["coefficients"])


def detrend(xyz, values, kind: str):
    """The trend fitted to the finite values, and its value at every position: (trend, fitted)."""
    ok = np.isfinite(values)
    trend = fit_trend(xyz[ok], values[ok], kind)
    return trend, trend_values(trend, xyz)


def diagnose(xyz, values, hole=None, axes=None, options: StationarityOptions | None = None,
             threads=None) -> dict:
    """All checks on one variable; the content of stationarity.json (``checks`` and ``flags``)."""
    o = options or StationarityOptions()
    xyz = np.asarray(xyz, dtype=np.float64)
    values = np.asarray(values, dtype=np.float64)
    keep = np.isfinite(values) & np.isfinite(xyz).all(axis=1)
    xyz, values = xyz[keep], values[keep]
    hole = None if hole is None else np.asarray(hole)[keep]
    n = len(values)
    if n < 20 or values.std() == 0:
        raise ValueError(f"{n} composites with values (at least 20 that are not all equal are needed)")
    sub = _subsample(n, o.variogram_sample_limit, np.random.default_rng(o.seed))  # for the two variogram checks
    sub_hole = None if hole is None else hole[sub]
    checks = {
        "trend": trend_check(xyz, values, axes, o, threads),
        "proportional_effect": proportional_effect_check(xyz, values, o),
        "mixture": mixture_check(values, o),
        "sill": sill_check(xyz[sub], values[sub], sub_hole, o, threads),
        "halves": halves_check(xyz[sub], values[sub], sub_hole, o, threads),
    }
    checks["sill"]["composites_used"] = checks["halves"]["composites_used"] = int(len(sub))
    summary = {"count": n, "mean": float(values.mean()), "variance": float(values.var(ddof=1)),
               "minimum": float(values.min()), "maximum": float(values.max()),
               "cv": float(values.std(ddof=1) / values.mean()) if values.mean() != 0 else None,
               "extent_m": (xyz.max(axis=0) - xyz.min(axis=0)).tolist()}
    flags = [name for name, check in checks.items() if check["flag"]]
    warnings = [checks[name]["sentence"] for name in flags]
    return {"summary": summary, "checks": checks, "flags": flags, "warnings": warnings}
