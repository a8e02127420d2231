"""Hole traces from collars and survey stations: minimum curvature, balanced tangential, tangential.

Station directions are unit vectors in (east, north, up); see docs/conventions.md for the angle and
dip conventions. Between stations, minimum curvature follows the circular arc joining the two station
directions (Sawaryn and Thorogood, SPE-84246-PA, 2005): the step is ``(dMD / 2) RF (t1 + t2)`` with the
ratio factor ``RF = tan(b / 2) / (b / 2)`` of the dogleg ``b``. Positions at any depth between stations
lie on that arc (the direction at a fraction f of the step is the spherical interpolation of t1 and
t2), not on the chord. Above the first station a hole runs straight along the first station's
direction; below the last it continues along the last direction.

Example
-------
>>> import pandas as pd
>>> collars = pd.DataFrame({"hole": ["A"], "x": [0.0], "y": [0.0], "z": [100.0], "depth": [100.0]})
>>> surveys = pd.DataFrame({"hole": ["A", "A"], "survey_depth": [0.0, 100.0], "azimuth": [90.0, 90.0],
...                         "dip": [-90.0, -90.0]})
>>> trace = Desurvey().fit(collars, surveys)
>>> trace.positions(["A"], [50.0]).round(6).tolist()
[[0.0, 0.0, 50.0]]
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd

from ._jit import jit, jit_parallel
from .errors import SurveyError, UsageError
from .tables import hole_codes

import numba

METHODS = ("minimum-curvature", "balanced-tangential", "tangential")
DIP_CONVENTIONS = ("negative-down", "positive-down")
_METHOD_CODE = {name: i for i, name in enumerate(METHODS)}
SMALL_ANGLE = 1e-4  # radians: below it the ratio factor and sinc use their series
NEAR_REVERSAL = math.pi - 1e-6  # a dogleg this close to 180 degrees has no defined arc
MAX_TRACE_POINTS = 50_000_000  # traces.csv beyond this is a mistaken --step, not a trace file


def direction_vectors(azimuth_deg, dip_deg, dip_convention: str = "negative-down",
                      azimuth_offset_deg: float = 0.0) -> np.ndarray:
    """Unit direction vectors (east, north, up) of stations, shape (n, 3).

    With the negative-down convention a dip of -90 points straight down; with positive-down, +90
    does. The azimuth offset (declination or grid convergence, degrees) is added to every azimuth.
    """
    if dip_convention not in DIP_CONVENTIONS:
        raise UsageError(f"dip convention {dip_convention!r}: use negative-down or positive-down.")
    azimuth = np.ascontiguousarray(np.ravel(azimuth_deg), dtype=np.float64)
    dip = np.ascontiguousarray(np.ravel(dip_deg), dtype=np.float64)
    sign = -1.0 if dip_convention == "positive-down" else 1.0
    return _directions(azimuth, dip, float(azimuth_offset_deg), sign)


@jit_parallel
def _directions(azimuth_deg, dip_deg, offset_deg, sign):
    n = azimuth_deg.shape[0]
    out = np.empty((n, 3))
    for i in numba.prange(n):
        a = math.radians(azimuth_deg[i] + offset_deg)
        d = sign * math.radians(dip_deg[i])
        c = math.cos(d)
        out[i, 0] = c * math.sin(a)
        out[i, 1] = c * math.cos(a)
        out[i, 2] = math.sin(d)
    return out


# --------------------------------------------------------------------------------------------
# kernels
# --------------------------------------------------------------------------------------------


@jit
def _sinc(u):
    """sin(u) / u, exact at 0 and accurate for small u."""
    if abs(u) < SMALL_ANGLE:
        u2 = u * u
        return 1.0 - u2 / 6.0 + u2 * u2 / 120.0
    return math.sin(u) / u


@jit
def _ratio_factor(b):
    """Minimum-curvature ratio factor tan(b/2) / (b/2); series 1 + b^2/12 + b^4/120 near 0."""
    if b < SMALL_ANGLE:
        b2 = b * b
        return 1.0 + b2 / 12.0 + b2 * b2 / 120.0
    return math.tan(0.5 * b) / (0.5 * b)


@jit
def _dogleg(ax, ay, az, bx, by, bz):
    """Angle between two unit vectors, accurate for tiny and large angles."""
    cx = ay * bz - az * by
    cy = az * bx - ax * bz
    cz = ax * by - ay * bx
    return math.atan2(math.sqrt(cx * cx + cy * cy + cz * cz), ax * bx + ay * by + az * bz)


# Columns of the packed station table: one row of 10 float64 per station, so that a position look-up
# touches few cache lines. B, SIN_B and COS_B describe the course from this station to the next.
DEPTH, X, Y, Z, TX, TY, TZ, B, SIN_B, COS_B = range(10)
TABLE_WIDTH = 10


@jit
def _step(method, s, length, b, sin_b, cos_b, t1x, t1y, t1z, t2x, t2y, t2z):
    """Displacement from a station to the point ``s`` metres further along the hole, on a course
    of ``length`` metres and dogleg ``b`` radians to the next station (0 <= s <= length)."""
    if method == 2:  # tangential: the whole course along the lower station's direction
        return s * t2x, s * t2y, s * t2z
    if method == 1 or b > NEAR_REVERSAL or length <= 0.0:
        # balanced tangential: first half along t1, second half along t2
        half = 0.5 * length
        a1 = min(s, half)
        a2 = max(s - half, 0.0)
        return a1 * t1x + a2 * t2x, a1 * t1y + a2 * t2y, a1 * t1z + a2 * t2z
    f = s / length
    fb = f * b
    # direction at fraction f along the arc: the spherical interpolation of t1 and t2
    if b < SMALL_ANGLE:
        sb = _sinc(b)
        wa = (1.0 - f) * _sinc((1.0 - f) * b) / sb
        wb = f * _sinc(fb) / sb
        rf = _ratio_factor(fb)
    else:  # one tangent gives sin(fb), cos(fb) and the ratio factor of the partial arc
        t = math.tan(0.5 * fb)
        inv = 1.0 / (1.0 + t * t)
        sin_fb = 2.0 * t * inv
        cos_fb = (1.0 - t * t) * inv
        wa = (sin_b * cos_fb - cos_b * sin_fb) / sin_b
        wb = sin_fb / sin_b
        rf = _ratio_factor(fb) if fb < SMALL_ANGLE else t / (0.5 * fb)
    ux = wa * t1x + wb * t2x
    uy = wa * t1y + wb * t2y
    uz = wa * t1z + wb * t2z
    k = 0.5 * s * rf
    return k * (t1x + ux), k * (t1y + uy), k * (t1z + uz)


@jit_parallel
def _station_table(start, depth, directions, collars, method):
    """The packed station table: depth, position, direction and the course to the next station."""
    n = depth.shape[0]
    table = np.zeros((n, TABLE_WIDTH))
    for h in numba.prange(start.shape[0] - 1):
        i0 = start[h]
        i1 = start[h + 1]
        for i in range(i0, i1):
            table[i, DEPTH] = depth[i]
            table[i, TX] = directions[i, 0]
            table[i, TY] = directions[i, 1]
            table[i, TZ] = directions[i, 2]
            table[i, COS_B] = 1.0
        if i1 <= i0:
            continue
        # the collar is at depth 0; above the first station the hole runs along its direction
        table[i0, X] = collars[h, 0] + depth[i0] * directions[i0, 0]
        table[i0, Y] = collars[h, 1] + depth[i0] * directions[i0, 1]
        table[i0, Z] = collars[h, 2] + depth[i0] * directions[i0, 2]
        for i in range(i0 + 1, i1):
            p = table[i - 1]
            length = depth[i] - depth[i - 1]
            b = _dogleg(p[TX], p[TY], p[TZ], table[i, TX], table[i, TY], table[i, TZ])
            p[B] = b
            p[SIN_B] = math.sin(b)
            p[COS_B] = math.cos(b)
            dx, dy, dz = _step(method, length, length, b, p[SIN_B], p[COS_B], p[TX], p[TY], p[TZ],
                               table[i, TX], table[i, TY], table[i, TZ])
            table[i, X] = p[X] + dx
            table[i, Y] = p[Y] + dy
            table[i, Z] = p[Z] + dz
    return table


@jit_parallel
def _positions(start, table, hole, depth, method):
    n = depth.shape[0]
    out = np.empty((n, 3))
    for q in numba.prange(n):
        h = hole[q]
        d = depth[q]
        if h < 0 or h >= start.shape[0] - 1 or start[h + 1] <= start[h] or not np.isfinite(d):
            out[q, 0] = np.nan
            out[q, 1] = np.nan
            out[q, 2] = np.nan
            continue
        i0 = start[h]
        last = start[h + 1] - 1
        if d <= table[i0, DEPTH] or d >= table[last, DEPTH]:
            k = i0 if d <= table[i0, DEPTH] else last
            e = d - table[k, DEPTH]  # straight along the end station's direction
            out[q, 0] = table[k, X] + e * table[k, TX]
            out[q, 1] = table[k, Y] + e * table[k, TY]
            out[q, 2] = table[k, Z] + e * table[k, TZ]
            continue
        lo = i0  # table[lo, DEPTH] <= d < table[hi, DEPTH]
        hi = last
        while hi - lo > 1:
            mid = (lo + hi) // 2
            if table[mid, DEPTH] <= d:
                lo = mid
            else:
                hi = mid
        p = table[lo]
        nxt = table[hi]
        dx, dy, dz = _step(method, d - p[DEPTH], nxt[DEPTH] - p[DEPTH], p[B], p[SIN_B], p[COS_B],
                           p[TX], p[TY], p[TZ], nxt[TX], nxt[TY], nxt[TZ])
        out[q, 0] = p[X] + dx
        out[q, 1] = p[Y] + dy
        out[q, 2] = p[Z] + dz
    return out


@jit
def _order_by_hole(hole, n_holes):
    """A stable counting sort of query indices by hole (invalid holes last)."""
    counts = np.zeros(n_holes + 2, dtype=np.int64)
    for h in hole:
        counts[(h if 0 <= h < n_holes else n_holes) + 1] += 1
    for k in range(1, n_holes + 2):
        counts[k] += counts[k - 1]
    order = np.empty(hole.shape[0], dtype=np.int64)
    for q in range(hole.shape[0]):
        h = hole[q]
        k = h if 0 <= h < n_holes else n_holes
        order[counts[k]] = q
        counts[k] += 1
    return order


# --------------------------------------------------------------------------------------------
# public API
# --------------------------------------------------------------------------------------------


def station_positions(start, depth_m, directions, collar_xyz, method: str = "minimum-curvature"):
    """Positions (n, 3) of survey stations given per-hole offsets into the station arrays.

    Parameters
    ----------
    start : int array (holes + 1)
        Station ``start[h]`` to ``start[h + 1] - 1`` belong to hole ``h``, sorted by depth.
    depth_m : float array (stations)
        Along-hole depth of each station.
    directions : float array (stations, 3)
        Unit vectors (east, north, up), see :func:`direction_vectors`.
    collar_xyz : float array (holes, 3)
        Collar position of each hole (depth 0).
    """
    table = _station_table(np.ascontiguousarray(start, dtype=np.int64),
                           np.ascontiguousarray(depth_m, dtype=np.float64),
                           np.ascontiguousarray(directions, dtype=np.float64),
                           np.ascontiguousarray(collar_xyz, dtype=np.float64), _method_code(method))
    return table[:, X:Z + 1].copy()


def _method_code(method: str) -> int:
    if method not in _METHOD_CODE:
        raise UsageError(f"desurvey method {method!r}: use one of {', '.join(METHODS)}.")
    return _METHOD_CODE[method]


class Desurvey:
    """Hole traces learned from collars and surveys.

    Parameters
    ----------
    method : {"minimum-curvature", "balanced-tangential", "tangential"}
    dip_convention : {"negative-down", "positive-down"}
    azimuth_offset_deg : float
        Added to every azimuth (magnetic declination or grid convergence), degrees.

    Attributes
    ----------
    hole_ids_ : object array (holes)
    end_depth_ : float array (holes), metres
    start_ : int array (holes + 1), offsets of each hole's stations
    depth_, xyz_, directions_ : station depth (m), position (m) and unit direction
    """

    def __init__(self, method: str = "minimum-curvature", dip_convention: str = "negative-down",
                 azimuth_offset_deg: float = 0.0):
        _method_code(method)
        if dip_convention not in DIP_CONVENTIONS:
            raise UsageError(f"dip convention {dip_convention!r}: use negative-down or positive-down.")
        self.method = method
        self.dip_convention = dip_convention
        self.azimuth_offset_deg = float(azimuth_offset_deg)

    def fit(self, collars: pd.DataFrame, surveys: pd.DataFrame) -> "Desurvey":
        """Learn station positions.

        ``collars`` has columns ``hole, x, y, z, depth`` and optionally ``azimuth, dip`` (used for a
        hole with no survey rows; without them such a hole is vertical). ``surveys`` has ``hole, at,
        azimuth, dip``. Survey rows of holes not in ``collars`` are ignored.
        """
        holes = pd.Index(collars["hole"].to_numpy(dtype=object).astype(str), dtype=object)
        if holes.has_duplicates:
            raise SurveyError(
                "collar hole ids must be unique to desurvey; duplicated: "
                + ", ".join(repr(h) for h in holes[holes.duplicated()].unique()[:5])
            )
        n_holes = len(holes)
        s_index = hole_codes(surveys["hole"], holes)
        known = s_index >= 0
        part = pd.DataFrame({
            "h": s_index[known],
            "at": surveys["survey_depth"].to_numpy(dtype=np.float64)[known],
            "azimuth": surveys["azimuth"].to_numpy(dtype=np.float64)[known],
            "dip": surveys["dip"].to_numpy(dtype=np.float64)[known],
        })
        bad = ~np.isfinite(part[["at", "azimuth", "dip"]].to_numpy()).all(axis=1)
        if bad.any():
            raise SurveyError(
                f"{int(bad.sum())} survey row(s) lack a depth, azimuth or dip (holes "
                + ", ".join(repr(holes[h]) for h in part.loc[bad, "h"].unique()[:5])
                + "); validate the tables first ('drillaxis check')."
            )
        counts = np.bincount(part["h"].to_numpy(), minlength=n_holes)
        missing = np.flatnonzero(counts == 0)
        if len(missing):
            azimuth = np.zeros(len(missing))
            dip = np.full(len(missing), -90.0 if self.dip_convention == "negative-down" else 90.0)
            if "azimuth" in collars and "dip" in collars:
                ca = collars["azimuth"].to_numpy(dtype=np.float64)[missing]
                cd = collars["dip"].to_numpy(dtype=np.float64)[missing]
                given = np.isfinite(ca) & np.isfinite(cd)
                azimuth[given], dip[given] = ca[given], cd[given]
            part = pd.concat([part, pd.DataFrame({"h": missing, "at": 0.0, "azimuth": azimuth, "dip": dip})],
                             ignore_index=True)
        h_col, at_col = part["h"].to_numpy(), part["at"].to_numpy()
        in_order = bool(np.all((h_col[1:] > h_col[:-1]) | ((h_col[1:] == h_col[:-1]) & (at_col[1:] >= at_col[:-1]))))
        if not in_order:
            part = part.iloc[np.lexsort((at_col, h_col))]
        counts = np.bincount(part["h"].to_numpy(), minlength=n_holes)
        self.start_ = np.zeros(n_holes + 1, dtype=np.int64)
        np.cumsum(counts, out=self.start_[1:])
        self.depth_ = np.ascontiguousarray(part["at"].to_numpy(dtype=np.float64))
        self.directions_ = direction_vectors(part["azimuth"].to_numpy(), part["dip"].to_numpy(),
                                             self.dip_convention, self.azimuth_offset_deg)
        collar_xyz = np.ascontiguousarray(collars[["x", "y", "z"]].to_numpy(dtype=np.float64))
        self._table = _station_table(self.start_, self.depth_, np.ascontiguousarray(self.directions_),
                                     collar_xyz, _method_code(self.method))
        self.xyz_ = self._table[:, X:Z + 1].copy()
        self.hole_ids_ = holes.to_numpy(dtype=object)
        self.end_depth_ = collars["depth"].to_numpy(dtype=np.float64)
        self.collar_xyz_ = collar_xyz
        return self

    def hole_index(self, holes) -> np.ndarray:
        """Integer index of each hole id (-1 where unknown)."""
        return hole_codes(holes, self.hole_ids_)

    def positions(self, holes, depth_m) -> np.ndarray:
        """Positions (n, 3) at along-hole depths; ``holes`` are ids or integer indices. Unknown
        holes give NaN."""
        holes = np.asarray(holes)
        index = holes.astype(np.int64) if np.issubdtype(holes.dtype, np.integer) else self.hole_index(holes)
        depth = np.ascontiguousarray(np.broadcast_to(np.asarray(depth_m, dtype=np.float64), index.shape))
        index = np.ascontiguousarray(index, dtype=np.int64)
        code = _method_code(self.method)
        if len(index) < 100_000 or not (np.diff(index) < 0).any():
            return _positions(self.start_, self._table, index, depth, code)
        # Queries in no particular hole order: visit them grouped by hole so that each hole's
        # stations stay in cache (6x faster on a million random queries), then put them back.
        order = _order_by_hole(index, len(self.hole_ids_))
        out = np.empty((len(index), 3))
        out[order] = _positions(self.start_, self._table, index[order], depth[order], code)
        return out

    def traces(self, step_m: float = 1.0) -> pd.DataFrame:
        """``hole, depth, x, y, z`` at every station within the hole, every ``step_m`` metres and at
        the end of the hole."""
        if not (step_m > 0) or not np.isfinite(step_m):
            raise UsageError(f"--step {step_m!r}: the trace step must be a positive number of metres.")
        n_holes = len(self.hole_ids_)
        end = np.nan_to_num(self.end_depth_, nan=0.0)
        n_grid = np.floor(end / step_m + 1e-9).astype(np.int64) + 1
        if float(n_grid.sum()) > MAX_TRACE_POINTS:
            raise UsageError(f"--step {step_m:g}: the traces would hold about {float(n_grid.sum()):.3g} points (at "
                             f"most {MAX_TRACE_POINTS:,}); give a step of the order of a metre.")
        grid_hole = np.repeat(np.arange(n_holes), n_grid)
        first = np.repeat(np.cumsum(n_grid) - n_grid, n_grid)
        grid_depth = (np.arange(len(grid_hole)) - first) * step_m
        station_hole = np.repeat(np.arange(n_holes), np.diff(self.start_))
        inside = self.depth_ <= end[station_hole] + 1e-9
        hole = np.concatenate([grid_hole, station_hole[inside], np.arange(n_holes)])
        depth = np.concatenate([grid_depth, self.depth_[inside], end])
        frame = pd.DataFrame({"h": hole, "depth": depth}).drop_duplicates().sort_values(["h", "depth"])
        xyz = self.positions(frame["h"].to_numpy(), frame["depth"].to_numpy())
        return pd.DataFrame({
            "hole": self.hole_ids_[frame["h"].to_numpy()], "depth": frame["depth"].to_numpy(),
            "x": xyz[:, 0], "y": xyz[:, 1], "z": xyz[:, 2],
        })


def sample_positions(trace: Desurvey, intervals: pd.DataFrame, value_columns=(), category_columns=()) -> pd.DataFrame:
    """Every interval row with its mid-point position: ``hole, from, to, x, y, z``, then values."""
    mid = 0.5 * (intervals["from"].to_numpy(dtype=np.float64) + intervals["to"].to_numpy(dtype=np.float64))
    xyz = trace.positions(intervals["hole"].to_numpy(), mid)
    frame = pd.DataFrame({
        "hole": intervals["hole"].to_numpy(), "from": intervals["from"].to_numpy(),
        "to": intervals["to"].to_numpy(), "x": xyz[:, 0], "y": xyz[:, 1], "z": xyz[:, 2],
    })
    for column in list(value_columns) + list(category_columns):
        frame[column] = intervals[column].to_numpy()
    return frame
