"""Gaussian random fields with a known anisotropic variogram, by the spectral method.

A stationary field with covariance C is a sum of cosines with random frequencies drawn from C's
spectral measure (Bochner's theorem): ``Z(x) = sqrt(2 C(0) / M) sum_k cos(w_k . x + phi_k)``, phases
uniform. For M features the field is close to Gaussian (central limit) and its covariance, averaged
over the frequencies, is exactly C; one realisation's variogram is a Monte Carlo estimate of the model
with M terms. No matrix over the samples is ever formed, so any number of points costs N x M.

Spectral measures for practical range 1 (distances already scaled by the ranges of each axis):

- exponential ``exp(-3 r)``: w = 3 t, with t a 3D Student t with one degree of freedom;
- gaussian ``exp(-3 r^2)``: w ~ N(0, 6 I);
- spherical of range 1: the self-convolution of a ball of diameter 1, so the density of w is
  proportional to the squared Fourier transform of that ball; |w| is drawn by inverting its radial
  distribution on a fine grid, the direction uniformly.

Samples of length l along a unit direction u take the exact line average of each cosine:
``cos(w . m + phi) sinc(w . u l / 2)`` at the mid-point m.
"""

from __future__ import annotations

import math

import numba
import numpy as np

from engine._jit import jit_parallel

SHAPES = ("spherical", "exponential", "gaussian")


def covariance(shape: str, r) -> np.ndarray:
    """Correlation of a unit-sill structure at scaled distance ``r`` (practical range 1)."""
    r = np.abs(np.asarray(r, dtype=np.float64))
    if shape == "spherical":
        return np.where(r < 1.0, 1.0 - 1.5 * r + 0.5 * r**3, 0.0)
    if shape == "exponential":
        return np.exp(-3.0 * r)
    if shape == "gaussian":
        return np.exp(-3.0 * r * r)
    raise ValueError(f"unknown shape {shape!r}; use one of {', '.join(SHAPES)}")


def _spherical_radial_table(k_max: float = 4000.0, n: int = 400_000):
    k = np.geomspace(1e-4, k_max, n)
    u = 0.5 * k
    density = (np.sin(u) - u * np.cos(u)) ** 2 / k**4  # k^2 |ball transform|^2 with the k^2 Jacobian
    cdf = np.concatenate([[0.0], np.cumsum(0.5 * (density[1:] + density[:-1]) * np.diff(k))])
    return k, cdf / cdf[-1]


_SPHERICAL_TABLE = None


def spectral_frequencies(shape: str, count: int, rng: np.random.Generator) -> np.ndarray:
    """``count`` frequencies (count, 3) of a unit-sill isotropic structure of practical range 1."""
    if shape == "gaussian":
        return rng.normal(0.0, math.sqrt(6.0), size=(count, 3))
    if shape == "exponential":
        z = rng.normal(size=(count, 3))
        w = rng.chisquare(1.0, size=count)
        return 3.0 * z / np.sqrt(w)[:, None]
    if shape == "spherical":
        global _SPHERICAL_TABLE
        if _SPHERICAL_TABLE is None:
            _SPHERICAL_TABLE = _spherical_radial_table()
        k, cdf = _SPHERICAL_TABLE
        radius = np.interp(rng.uniform(size=count), cdf, k)
        direction = rng.normal(size=(count, 3))
        direction /= np.linalg.norm(direction, axis=1)[:, None]
        return direction * radius[:, None]
    raise ValueError(f"unknown shape {shape!r}; use one of {', '.join(SHAPES)}")


@jit_parallel
def _cosine_sum(points, directions, lengths, freq, phase, amplitude):
    n = points.shape[0]
    m = freq.shape[0]
    out = np.zeros(n)
    for i in numba.prange(n):
        px, py, pz = points[i, 0], points[i, 1], points[i, 2]
        ux, uy, uz = directions[i, 0], directions[i, 1], directions[i, 2]
        half = 0.5 * lengths[i]
        total = 0.0
        for k in range(m):
            wx, wy, wz = freq[k, 0], freq[k, 1], freq[k, 2]
            c = math.cos(wx * px + wy * py + wz * pz + phase[k])
            a = (wx * ux + wy * uy + wz * uz) * half
            if abs(a) > 1e-8:
                c *= math.sin(a) / a
            total += c
        out[i] = amplitude * total
    return out


class SpectralField:
    """A zero-mean Gaussian field: nested structures with one rotation, drawn once from ``rng``.

    Parameters
    ----------
    structures : list of (shape, sill, (major_m, semi_major_m, minor_m))
    axes : (3, 3) array
        Rows: unit major, semi-major and minor axes in (east, north, up).
    rng : numpy Generator
    features : int
        Cosines per structure.
    origin : (3,) array
        Subtracted from positions before evaluation (keeps phases small).
    """

    def __init__(self, structures, axes, rng: np.random.Generator, features: int = 2000, origin=(0.0, 0.0, 0.0)):
        self.axes = np.asarray(axes, dtype=np.float64)
        self.origin = np.asarray(origin, dtype=np.float64)
        self._parts = []
        for shape, sill, ranges in structures:
            if sill <= 0:
                continue
            w = spectral_frequencies(shape, features, rng)
            # scaled coordinates u = diag(1/ranges) A x, with A the rows of the axes: w . u = (A^T diag(1/r) w) . x
            world = (w / np.asarray(ranges, dtype=np.float64)) @ self.axes
            phase = rng.uniform(0.0, 2.0 * np.pi, size=features)
            self._parts.append((np.ascontiguousarray(world), phase, math.sqrt(2.0 * sill / features)))

    def values(self, points, directions=None, lengths=None) -> np.ndarray:
        """Field values at ``points`` (n, 3), or line averages over samples of ``lengths`` metres
        along unit ``directions`` centred on them."""
        p = np.ascontiguousarray(np.asarray(points, dtype=np.float64) - self.origin)
        n = p.shape[0]
        d = np.zeros((n, 3)) if directions is None else np.ascontiguousarray(directions, dtype=np.float64)
        l = np.zeros(n) if lengths is None else np.ascontiguousarray(lengths, dtype=np.float64)
        total = np.zeros(n)
        for world, phase, amplitude in self._parts:
            total += _cosine_sum(p, d, l, world, phase, amplitude)
        return total
