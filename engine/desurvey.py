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
>>> surveys = pd.DataFrame({"hole": ["A", "A"], "at": [0.0, 100.0], "azimuth": [90.0, 90.0],
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

import numba

METHODS = ("minimum-curvature", "balanced-tangential", "tangential")
DIP_CONVENTIONS = ("negative-down", "positive-down")
_METHOD_CODE = {name: i for i, name in enumerate(METHODS)}
SMALL_ANGLE = 1e-4  # radians: below it the ratio factor and sinc use their series
NEAR_REVERSAL = math.pi - 1e-6  # a dogleg this close to 180 degrees has no defined arc


def direction_vectors(azimuth_deg, dip_deg, dip_convention: str = "negative-down",
                      azimuth_offset_deg: float = 0.0) -> np.ndarray:
    """Unit direction vectors (east, north, up) of stations, shape (n, 3).

    With the negative-down convention a dip of -90 points straight down; with positive-down, +90
    does. The azimuth offset (declination or grid convergence, degrees) is added to every azimuth.
    """
    if dip_convention not in DIP_CONVENTIONS:
        raise UsageError(f"dip convention {dip_convention!r}: use negative-down or positive-down.")
    azimuth = np.radians(np.asarray(azimuth_deg, dtype=np.float64) + float(azimuth_offset_deg))
    dip = np.radians(np.asarray(dip_deg, dtype=np.float64))
    if dip_convention == "positive-down":
        dip = -dip
    cos_dip = np.cos(dip)
    return np.stack([cos_dip * np.sin(azimuth), cos_dip * np.cos(azimuth), np.sin(dip)], axis=-1)


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


@jit
def _step(method, s, length, t1x, t1y, t1z, t2x, t2y, t2z):
    """Displacement from a station to the point ``s`` metres further along the hole, on a course
    of ``length`` metres to the next station (0 <= s <= length)."""
    if method == 2:  # tangential: the whole course along the lower station's direction
        return s * t2x, s * t2y, s * t2z
    b = _dogleg(t1x, t1y, t1z, t2x, t2y, t2z)
    if method == 1 or b > NEAR_REVERSAL or length <= 0.0:
        # balanced tangential: first half along t1, second half along t2
        half = 0.5 * length
        a1 = min(s, half)
        a2 = max(s - half, 0.0)
        return a1 * t1x + a2 * t2x, a1 * t1y + a2 * t2y, a1 * t1z + a2 * t2z
    f = s / length
    # direction at fraction f along the arc: spherical interpolation, stable for small b
    sb = _sinc(b)
    wa = (1.0 - f) * _sinc((1.0 - f) * b) / sb
    wb = f * _sinc(f * b) / sb
    ux = wa * t1x + wb * t2x
    uy = wa * t1y + wb * t2y
    uz = wa * t1z + wb * t2z
    k = 0.5 * s * _ratio_factor(f * b)
    return k * (t1x + ux), k * (t1y + uy), k * (t1z + uz)


@jit_parallel
def _station_positions(start, depth, tx, ty, tz, cx, cy, cz, method):
    n = depth.shape[0]
    x = np.empty(n)
    y = np.empty(n)
    z = np.empty(n)
    for h in numba.prange(start.shape[0] - 1):
        i0 = start[h]
        i1 = start[h + 1]
        if i1 <= i0:
            continue
        # the collar is at depth 0; above the first station the hole runs along its direction
        x[i0] = cx[h] + depth[i0] * tx[i0]
        y[i0] = cy[h] + depth[i0] * ty[i0]
        z[i0] = cz[h] + depth[i0] * tz[i0]
        for i in range(i0 + 1, i1):
            length = depth[i] - depth[i - 1]
            dx, dy, dz = _step(method, length, length, tx[i - 1], ty[i - 1], tz[i - 1], tx[i], ty[i], tz[i])
            x[i] = x[i - 1] + dx
            y[i] = y[i - 1] + dy
            z[i] = z[i - 1] + dz
    return x, y, z


@jit_parallel
def _positions(start, sdepth, sx, sy, sz, tx, ty, tz, hole, depth, method):
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
        if d <= sdepth[i0]:
            e = d - sdepth[i0]
            out[q, 0] = sx[i0] + e * tx[i0]
            out[q, 1] = sy[i0] + e * ty[i0]
            out[q, 2] = sz[i0] + e * tz[i0]
            continue
        if d >= sdepth[last]:
            e = d - sdepth[last]
            out[q, 0] = sx[last] + e * tx[last]
            out[q, 1] = sy[last] + e * ty[last]
            out[q, 2] = sz[last] + e * tz[last]
            continue
        lo = i0  # sdepth[lo] <= d < sdepth[hi]
        hi = last
        while hi - lo > 1:
            mid = (lo + hi) // 2
            if sdepth[mid] <= d:
                lo = mid
            else:
                hi = mid
        length = sdepth[hi] - sdepth[lo]
        dx, dy, dz = _step(method, d - sdepth[lo], length, tx[lo], ty[lo], tz[lo], tx[hi], ty[hi], tz[hi])
        out[q, 0] = sx[lo] + dx
        out[q, 1] = sy[lo] + dy
        out[q, 2] = sz[lo] + dz
    return out


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
    code = _method_code(method)
    d = np.ascontiguousarray(directions, dtype=np.float64)
    c = np.ascontiguousarray(collar_xyz, dtype=np.float64)
    x, y, z = _station_positions(
        np.ascontiguousarray(start, dtype=np.int64), np.ascontiguousarray(depth_m, dtype=np.float64),
        np.ascontiguousarray(d[:, 0]), np.ascontiguousarray(d[:, 1]), np.ascontiguousarray(d[:, 2]),
        np.ascontiguousarray(c[:, 0]), np.ascontiguousarray(c[:, 1]), np.ascontiguousarray(c[:, 2]), code,
    )
    return np.stack([x, y, z], axis=1)


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
        holes = pd.Index(collars["hole"].astype(str))
        if holes.has_duplicates:
            raise SurveyError(
                "collar hole ids must be unique to desurvey; duplicated: "
                + ", ".join(repr(h) for h in holes[holes.duplicated()].unique()[:5])
            )
        n_holes = len(holes)
        s_index = holes.get_indexer(surveys["hole"].astype(str))
        known = s_index >= 0
        part = pd.DataFrame({
            "h": s_index[known],
            "at": surveys["at"].to_numpy(dtype=np.float64)[known],
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
        part = part.sort_values(["h", "at"], kind="stable")
        counts = np.bincount(part["h"].to_numpy(), minlength=n_holes)
        self.start_ = np.zeros(n_holes + 1, dtype=np.int64)
        np.cumsum(counts, out=self.start_[1:])
        self.depth_ = np.ascontiguousarray(part["at"].to_numpy(dtype=np.float64))
        self.directions_ = direction_vectors(part["azimuth"].to_numpy(), part["dip"].to_numpy(),
                                             self.dip_convention, self.azimuth_offset_deg)
        collar_xyz = collars[["x", "y", "z"]].to_numpy(dtype=np.float64)
        self.xyz_ = station_positions(self.start_, self.depth_, self.directions_, collar_xyz, self.method)
        self.hole_ids_ = holes.to_numpy(dtype=object)
        self._index = holes
        self.end_depth_ = collars["depth"].to_numpy(dtype=np.float64)
        self.collar_xyz_ = collar_xyz
        return self

    def hole_index(self, holes) -> np.ndarray:
        """Integer index of each hole id (-1 where unknown)."""
        return self._index.get_indexer(pd.Index(np.asarray(holes, dtype=object).astype(str)))

    def positions(self, holes, depth_m) -> np.ndarray:
        """Positions (n, 3) at along-hole depths; ``holes`` are ids or integer indices. Unknown
        holes give NaN."""
        holes = np.asarray(holes)
        index = holes.astype(np.int64) if np.issubdtype(holes.dtype, np.integer) else self.hole_index(holes)
        depth = np.ascontiguousarray(np.broadcast_to(np.asarray(depth_m, dtype=np.float64), index.shape))
        d = self.directions_
        return _positions(
            self.start_, self.depth_,
            np.ascontiguousarray(self.xyz_[:, 0]), np.ascontiguousarray(self.xyz_[:, 1]),
            np.ascontiguousarray(self.xyz_[:, 2]),
            np.ascontiguousarray(d[:, 0]), np.ascontiguousarray(d[:, 1]), np.ascontiguousarray(d[:, 2]),
            np.ascontiguousarray(index, dtype=np.int64), depth, _method_code(self.method),
        )

    def traces(self, step_m: float = 1.0) -> pd.DataFrame:
        """``hole, depth, x, y, z`` at every station within the hole, every ``step_m`` metres and at
        the end of the hole."""
        if not (step_m > 0) or not np.isfinite(step_m):
            raise UsageError(f"--step {step_m!r}: the trace step must be a positive number of metres.")
        n_holes = len(self.hole_ids_)
        end = np.nan_to_num(self.end_depth_, nan=0.0)
        n_grid = np.floor(end / step_m + 1e-9).astype(np.int64) + 1
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
