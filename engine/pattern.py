"""Is the fitted ellipsoid supported by the drilling, or produced by it?

From the composites alone (positions and hole of each): the hole spacing (nearest-neighbour
statistics of the hole tops in plan and of the hole middles in 3D), the drill-line orientation (the
axial mean of the directions from each hole top to its nearest neighbours, with its strength 0-1),
the spacing along and across the lines, and the mean hole direction. Then, per principal axis of a
fitted model: the sample spacing along the axis (median distance to the nearest other composite
within 15 degrees of it), the pairs per lag, the first lag with enough pairs, and warnings when the
fitted range is shorter than that spacing (the range is not supported by any pair), or shorter than
two spacings (the rise to the sill is not resolved: at most one lag inside the range), or when the major
or minor axis lies within 15 degrees of the drill lines or of the holes (it may be the pattern's).

Example
-------
>>> import numpy as np
>>> x, y = np.meshgrid(np.arange(5) * 20.0, np.arange(3) * 80.0)
>>> tops = np.c_[x.ravel(), y.ravel(), np.zeros(15)]
>>> xyz = np.concatenate([tops + [0, 0, -d] for d in range(0, 50, 2)])
>>> hole = np.tile(np.arange(15), 25)
>>> p = drill_pattern(xyz, hole)
>>> round(p["lines"]["trend"]), round(p["lines"]["along_m"]), round(p["lines"]["across_m"])
(90, 20, 80)
"""

from __future__ import annotations

import math

import numpy as np

from .model import AXIS_NAMES
from .orientation import trend_plunge, vector_from_trend_plunge

CONE_DEG = 15.0
ARTIFACT_DEG = 15.0


def _axial_angle_deg(a, b) -> float:
    a = np.asarray(a, dtype=np.float64)
    b = np.asarray(b, dtype=np.float64)
    c = abs(float(a @ b) / (np.linalg.norm(a) * np.linalg.norm(b)))
    return math.degrees(math.acos(min(1.0, c)))


def hole_ends(xyz, hole):
    """The highest and the lowest composite of each hole, holes in ascending order of their ids:
    (tops, bottoms) as (holes, 3) arrays."""
    order = np.lexsort((-xyz[:, 2], hole))
    h = hole[order]
    first = np.r_[True, h[1:] != h[:-1]]
    last = np.r_[h[1:] != h[:-1], True]
    return xyz[order][first], xyz[order][last]


def drill_pattern(xyz, hole) -> dict:
    """Spacing, drill lines and hole direction of a composite set (metres, degrees)."""
    from scipy.spatial import cKDTree

    xyz = np.asarray(xyz, dtype=np.float64)
    hole = np.asarray(hole)
    tops, bottoms = hole_ends(xyz, hole)
    mids = np.array([xyz[hole == k].mean(axis=0) for k in np.unique(hole)])
    n = len(tops)
    out = {"holes": int(n), "composites": int(len(xyz))}
    if n >= 2:
        tree = cKDTree(tops[:, :2])
        k = min(n, 5)
        d, j = tree.query(tops[:, :2], k=k)
        nn = d[:, 1]
        out["collar_spacing_m"] = {"median": float(np.median(nn)), "mean": float(nn.mean()),
                                   "p10": float(np.percentile(nn, 10)), "p90": float(np.percentile(nn, 90))}
        dm, _ = cKDTree(mids).query(mids, k=2)
        out["hole_spacing_3d_m"] = {"median": float(np.median(dm[:, 1]))}
        # the axial mean of the nearest neighbours' directions (doubled angles), weighted by closeness
        vec = tops[j[:, 1:], :2] - tops[:, None, :2]
        theta = np.arctan2(vec[..., 0], vec[..., 1])  # clockwise from north
        w = 1.0 / np.maximum(d[:, 1:], 1e-9) ** 2
        c = (w * np.cos(2 * theta)).sum() / w.sum()
        s = (w * np.sin(2 * theta)).sum() / w.sum()
        trend = (math.degrees(math.atan2(s, c)) / 2.0) % 180.0
        strength = float(math.hypot(c, s))
        along = vector_from_trend_plunge(trend, 0.0)
        across = vector_from_trend_plunge(trend + 90.0, 0.0)
        # the nearest hole along the lines and across them (within 20 degrees)
        along_m = _nearest_in_cone(tops[:, :2], along[:2], 20.0)
        across_m = _nearest_in_cone(tops[:, :2], across[:2], 20.0)
        out["lines"] = {"trend": float(trend), "strength": strength, "along_m": along_m, "across_m": across_m,
                        "fences": bool(strength > 0.3 and across_m > 1.5 * along_m)}
    u = bottoms - tops
    length = np.linalg.norm(u, axis=1)
    ok = length > 0
    if ok.any():
        u = u[ok] / length[ok, None]
        u[u[:, 2] > 0] *= -1  # the downward sense
        mean = u.mean(axis=0)
        if np.linalg.norm(mean) > 0:
            t, p = trend_plunge(mean)
            out["hole_direction"] = {"trend": t, "plunge": p, "vector": (mean / np.linalg.norm(mean)).tolist()}
    return out


def _nearest_in_cone(points, direction, cone_deg, sample=4000, seed=0) -> float:
    """Median, over (up to ``sample``) points, of the distance to the nearest other point within
    ``cone_deg`` of ``direction`` (either sense); NaN where none is found."""
    from scipy.spatial import cKDTree

    points = np.asarray(points, dtype=np.float64)
    direction = np.asarray(direction, dtype=np.float64)
    direction = direction / np.linalg.norm(direction)
    n = len(points)
    if n < 2:
        return float("nan")
    rng = np.random.default_rng(seed)
    pick = rng.choice(n, min(n, sample), replace=False)
    tree = cKDTree(points)
    k = min(n, 256)
    d, j = tree.query(points[pick], k=k)
    vec = points[j] - points[pick][:, None, :]
    with np.errstate(invalid="ignore", divide="ignore"):
        cos = np.abs(vec @ direction) / d
    inside = (d > 0) & (cos >= math.cos(math.radians(cone_deg)))
    first = np.where(inside.any(axis=1), np.where(inside, d, np.inf).min(axis=1), np.nan)
    first = first[np.isfinite(first)]
    return float(np.median(first)) if len(first) else float("nan")


def check_model(pattern: dict, xyz, axes, ranges, principal=None, lags=None, min_pairs: int = 30) -> dict:
    """Per principal axis: spacing, pairs per lag, first supported lag and the warnings.

    ``axes`` rows major, semi-major, minor; ``ranges`` the longest structure's practical ranges
    along them; ``principal`` optional experimental variograms (``distance``, ``pairs``) per axis."""
    out = {"axes": {}, "warnings": []}
    lines = pattern.get("lines")
    holes = pattern.get("hole_direction")
    for a, name in enumerate(AXIS_NAMES):
        axis = np.asarray(axes[a], dtype=np.float64)
        spacing = _nearest_in_cone(xyz, axis, CONE_DEG)
        t, p = trend_plunge(axis)
        entry = {"trend": t, "plunge": p, "range_m": float(ranges[a]), "sample_spacing_m": spacing}
        if principal is not None:
            ex = principal[a]
            pairs = np.asarray(ex.pairs, dtype=np.float64)
            entry["pairs_per_lag"] = [float(v) for v in pairs]
            good = np.flatnonzero(pairs >= min_pairs)
            entry["first_supported_lag_m"] = float(ex.distance[good[0]]) if len(good) else None
        entry["spacings_within_range"] = float(ranges[a] / spacing) if math.isfinite(spacing) and spacing > 0 \
            else None
        if math.isfinite(spacing) and ranges[a] < spacing:
            entry["supported"] = False
            out["warnings"].append(
                f"The {name.replace('_', '-')} range ({ranges[a]:.1f} m) is shorter than the sample spacing along "
                f"that axis ({spacing:.1f} m): no pair of samples resolves it; it is not supported by the data.")
        elif math.isfinite(spacing) and ranges[a] < 2.0 * spacing:
            entry["supported"] = "weakly"
            out["warnings"].append(
                f"The {name.replace('_', '-')} range ({ranges[a]:.1f} m) is less than two sample spacings along that "
                f"axis ({spacing:.1f} m): at most one lag of data lies inside it, so the rise to the sill along "
                f"this axis is not resolved and the range may reflect the spacing rather than the geology.")
        else:
            entry["supported"] = bool(math.isfinite(spacing))
        if lines is not None and name in ("major", "minor"):
            line_vec = vector_from_trend_plunge(lines["trend"], 0.0)
            entry["angle_to_drill_lines_deg"] = _axial_angle_deg(axis, line_vec)
            if lines["strength"] > 0.3 and entry["angle_to_drill_lines_deg"] <= ARTIFACT_DEG:
                out["warnings"].append(
                    f"The {name} axis lies within {entry['angle_to_drill_lines_deg']:.0f} degrees of the drill lines "
                    f"(trend {lines['trend']:.0f}, holes {lines['along_m']:.0f} m apart along them, "
                    f"{lines['across_m']:.0f} m across): the anisotropy may be produced by the drill pattern.")
        if holes is not None and name in ("major", "minor"):
            entry["angle_to_holes_deg"] = _axial_angle_deg(axis, holes["vector"])
            if entry["angle_to_holes_deg"] <= ARTIFACT_DEG:
                out["warnings"].append(
                    f"The {name} axis lies within {entry['angle_to_holes_deg']:.0f} degrees of the mean hole direction "
                    f"(trend {holes['trend']:.0f}, plunge {holes['plunge']:.0f}): along the holes pairs are many "
                    f"and short, and the anisotropy may be produced by the drilling.")
        out["axes"][name] = entry
    return out
