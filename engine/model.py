"""Variogram models: a nugget plus nested structures, each with its shape, sill and three practical
ranges along the axes of one anisotropy ellipsoid (docs/conventions.md).

Ranges are practical ranges: the distance at which an exponential or gaussian structure reaches 95%
of its sill; the spherical reaches all of its sill at its range (95% at about 0.81 of it). So the
exponential's parameter is range / 3 and the gaussian's range / sqrt(3). A lag vector h is turned
into the structure's scaled distance
``r = |(h . major / a_major, h . semi_major / a_semi, h . minor / a_minor)|`` and the structure
contributes ``sill g(r)`` with g the shape at practical range 1. The nugget applies at any h != 0.

Example
-------
>>> import numpy as np
>>> m = Model(0.2, [Structure("spherical", 0.8, (100.0, 50.0, 10.0))], np.eye(3))
>>> [round(float(g), 4) for g in m.gamma(np.array([[50.0, 0, 0], [0, 25.0, 0], [0, 0, 20.0]]))]
[0.75, 0.75, 1.0]
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from .errors import UsageError
from .orientation import orientation_from_axes

SHAPES = ("spherical", "exponential", "gaussian")
AXIS_NAMES = ("major", "semi_major", "minor")


def unit_variogram(shape: str, r) -> np.ndarray:
    """A unit-sill structure at scaled distance ``r`` (practical range 1)."""
    r = np.abs(np.asarray(r, dtype=np.float64))
    if shape == "spherical":
        return np.where(r < 1.0, 1.5 * r - 0.5 * r**3, 1.0)
    if shape == "exponential":
        return 1.0 - np.exp(-3.0 * r)
    if shape == "gaussian":
        return 1.0 - np.exp(-3.0 * r * r)
    raise UsageError(f"unknown shape {shape!r}; use one of {', '.join(SHAPES)}")


@dataclass
class Structure:
    """One nested structure: shape, sill and practical ranges (major, semi-major, minor), metres."""

    shape: str
    sill: float
    ranges_m: tuple

    def __post_init__(self):
        self.ranges_m = tuple(float(r) for r in self.ranges_m)
        if len(self.ranges_m) != 3:
            raise UsageError("a structure needs three ranges: major, semi-major, minor")


def _scaled(local, structure: Structure) -> np.ndarray:
    """The scaled distance of lag vectors already in the model's axes."""
    scaled = local / np.asarray(structure.ranges_m)
    return np.sqrt(np.einsum("ij,ij->i", scaled, scaled))


@dataclass
class Model:
    """Nugget, nested structures and the ellipsoid's axes (rows major, semi-major, minor: unit
    vectors in east, north, up, right-handed)."""

    nugget: float
    structures: list = field(default_factory=list)
    axes: np.ndarray = field(default_factory=lambda: np.eye(3))

    def __post_init__(self):
        self.axes = np.asarray(self.axes, dtype=np.float64).reshape(3, 3)

    @property
    def sill(self) -> float:
        """Total sill: the nugget plus every structure's sill."""
        return float(self.nugget + sum(s.sill for s in self.structures))

    def scaled_distance(self, h, structure: Structure) -> np.ndarray:
        """The structure's scaled distance of lag vectors ``h`` (n, 3)."""
        local = np.atleast_2d(np.asarray(h, dtype=np.float64)) @ self.axes.T
        return _scaled(local, structure)

    def gamma(self, h) -> np.ndarray:
        """The model's semivariogram at lag vectors ``h`` (n, 3), metres."""
        h = np.atleast_2d(np.asarray(h, dtype=np.float64))
        local = h @ self.axes.T  # once for every structure: the fits call this thousands of times
        out = np.where(np.einsum("ij,ij->i", h, h) > 0, self.nugget, 0.0)
        for s in self.structures:
            out = out + s.sill * unit_variogram(s.shape, _scaled(local, s))
        return out

    def gamma_along(self, direction, distance_m) -> np.ndarray:
        """The semivariogram at ``distance_m`` along a unit ``direction`` (3,)."""
        u = np.asarray(direction, dtype=np.float64)
        u = u / np.linalg.norm(u)
        return self.gamma(np.asarray(distance_m, dtype=np.float64).reshape(-1, 1) * u[None, :])

    def covariance(self, h) -> np.ndarray:
        """Covariance C(h) = sill - gamma(h) (C(0) = sill)."""
        return self.sill - self.gamma(h)

    def range_along(self, direction) -> float:
        """The practical range of the longest structure along a unit direction, metres: the
        distance at which that structure's scaled distance reaches 1."""
        u = np.asarray(direction, dtype=np.float64)
        u = u / np.linalg.norm(u)
        longest = max(self.structures, key=lambda s: s.ranges_m[0])
        return float(1.0 / np.linalg.norm((self.axes @ u) / np.asarray(longest.ranges_m)))

    def effective_range(self, direction, share: float = 0.95) -> float:
        """The distance along a unit direction at which the whole model first reaches the nugget
        plus ``share`` of the structures' sill (metres; comparable between nested models)."""
        if not self.structures:
            return 0.0
        target = self.nugget + share * (self.sill - self.nugget)
        hi = 2.0 * max(max(s.ranges_m) for s in self.structures)
        while float(self.gamma_along(direction, hi)[0]) < target and hi < 1e12:
            hi *= 2.0
        lo = 0.0
        for _ in range(80):
            mid = 0.5 * (lo + hi)
            if float(self.gamma_along(direction, mid)[0]) < target:
                lo = mid
            else:
                hi = mid
        return hi

    def problems(self) -> list[str]:
        """Why the model could not be used in an estimate (empty when it can)."""
        out = []
        if not (self.nugget >= 0 and math.isfinite(self.nugget)):
            out.append(f"nugget {self.nugget!r} is negative or not finite")
        for k, s in enumerate(self.structures, 1):
            if s.shape not in SHAPES:
                out.append(f"structure {k}: unknown shape {s.shape!r}")
            if not (s.sill >= 0 and math.isfinite(s.sill)):
                out.append(f"structure {k}: sill {s.sill!r} is negative or not finite")
            if not all(r > 0 and math.isfinite(r) for r in s.ranges_m):
                out.append(f"structure {k}: ranges {s.ranges_m} must be above zero")
        gram = self.axes @ self.axes.T
        if not np.isfinite(self.axes).all() or not np.allclose(gram, np.eye(3), atol=1e-6) \
                or np.linalg.det(self.axes) < 0:
            out.append("the axes are not orthonormal and right-handed")
        if self.sill <= 0:
            out.append("the total sill is not above zero")
        return out

    def to_json(self) -> dict:
        """The model's part of ``model.json`` (nugget, structures, axes, orientation)."""
        orientation = orientation_from_axes(self.axes)
        axes = orientation.pop("axes")
        return {
            "nugget": float(self.nugget),
            "structures": [{"shape": s.shape, "sill": float(s.sill),
                            "ranges": dict(zip(AXIS_NAMES, map(float, s.ranges_m)))} for s in self.structures],
            "axes": axes,
            "orientation": orientation,
            "range_convention": "practical",
        }

    @classmethod
    def from_json(cls, data: dict) -> "Model":
        """Read the model from a ``model.json`` dictionary (or the model part of ``truth.json``)."""
        try:
            structures = [Structure(s["shape"], float(s["sill"]), tuple(s["ranges"][n] for n in AXIS_NAMES))
                          for s in data["structures"]]
            axes = np.array([data["axes"][n] for n in AXIS_NAMES], dtype=np.float64)
            return cls(float(data["nugget"]), structures, axes)
        except (KeyError, TypeError, ValueError) as exc:
            raise UsageError(f"not a drillaxis model: {exc!r} is missing or malformed") from None
