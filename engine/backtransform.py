"""A model fitted on transformed values, back in grade units (docs/methods.md, "Models in grade units").

A variogram fitted to the logarithms or to the normal scores of the grades is what a simulation needs,
but kriging of grades needs the grades' own variogram. Each transform has its relation:

- log: for Z = exp(Y) with Y Gaussian of covariance C_Y, C_Z(h) = m^2 (exp(C_Y(h)) - 1), m the mean
  of Z (Journel and Huijbregts, *Mining Geostatistics*, 1978). It holds when the grades are lognormal
  (their logarithms Gaussian, jointly), an assumption the output states.
- normal score: Z = phi(Y) with Y standard normal; expanding the anamorphosis phi in normalised
  Hermite polynomials, phi = sum phi_n eta_n, gives C_Z(h) = sum_{n >= 1} phi_n^2 rho(h)^n, rho the
  correlogram of the normal scores (Rivoirard, *Introduction to Disjunctive Kriging and Non-Linear
  Geostatistics*, 1994; Wackernagel, *Multivariate Geostatistics*, 2003). The coefficients come from
  the declustered distribution of the grades, a step function: with the distinct values z_1 < ... < z_N
  and the normal score y_i of the cumulative (declustered) probability at z_i,
  phi_n = sum_{i < N} (z_{i+1} - z_i) eta_{n-1}(y_i) g(y_i) / sqrt(n) (g the standard normal density;
  from d/dy [eta_{n-1} g] = -sqrt(n) eta_n g).

The grades' variogram gamma_Z(h) = C_Z(0) - C_Z(h) is not exactly of the fitted model's family, so a
model of the same axes, shapes and number of structures is fitted to it by least squares at lags
along the three axes, its nugget fixed at gamma_Z just off zero; the largest relative misfit over
those lags is reported with it.
"""

from __future__ import annotations

import math

import numpy as np

from .model import Model
from .variogram import weighted_distribution

HERMITE_TERMS = 100
LAGS_PER_AXIS = 30


def _distinct_cdf(values, weights):
    """Distinct finite values in increasing order and the cumulative (weighted) probability at each."""
    v = np.asarray(values, dtype=np.float64)
    w = np.ones(len(v)) if weights is None else np.asarray(weights, dtype=np.float64)
    ok = np.isfinite(v) & np.isfinite(w) & (w > 0)
    z, cdf, mass, _ = weighted_distribution(v[ok], w[ok])
    return z, cdf, mass


def hermite_coefficients(values, weights=None, terms: int = HERMITE_TERMS) -> np.ndarray:
    """phi_0 .. phi_terms of the anamorphosis of ``values`` (declustering ``weights``): phi_0 the mean,
    sum of phi_n^2 for n >= 1 the variance as ``terms`` grows."""
    from scipy.special import ndtri

    z, cdf, mass = _distinct_cdf(values, weights)
    phi = np.zeros(terms + 1)
    phi[0] = float(np.sum(mass * z))
    if len(z) < 2:
        return phi
    y = ndtri(np.clip(cdf[:-1], 1e-12, 1 - 1e-12))
    step = np.diff(z)
    g = np.exp(-0.5 * y * y) / math.sqrt(2.0 * math.pi)
    eta_prev, eta = np.zeros_like(y), np.ones_like(y)  # eta_{-1}, eta_0
    for n in range(1, terms + 1):
        phi[n] = float(np.sum(step * eta * g)) / math.sqrt(n)
        eta_prev, eta = eta, (y * eta - math.sqrt(n - 1) * eta_prev) / math.sqrt(n)
    return phi


def lognormal_gamma(model: Model, mean: float, h) -> np.ndarray:
    """gamma_Z at lag vectors ``h`` (m, 3) for Z = exp(Y), Y with ``model``: m^2 (exp(C_Y(0)) - exp(C_Y(h)))."""
    c0 = model.sill
    cy = c0 - model.gamma(np.asarray(h, dtype=np.float64))
    return mean * mean * (math.exp(c0) - np.exp(cy))


def hermite_gamma(model: Model, phi, h) -> np.ndarray:
    """gamma_Z at lag vectors ``h`` (m, 3) for Z = phi(Y), Y the normal scores with ``model``:
    sum_{n >= 1} phi_n^2 (1 - rho(h)^n), rho = 1 - gamma_Y / sill."""
    rho = 1.0 - model.gamma(np.asarray(h, dtype=np.float64)) / model.sill
    n = np.arange(1, len(phi))
    return np.sum(np.asarray(phi[1:])[None, :] ** 2 * (1.0 - rho[:, None] ** n[None, :]), axis=1)


def _lags(model: Model) -> np.ndarray:
    """Lag vectors along the three axes, from 1/40 of each axis's longest range to 1.5 times it."""
    out = []
    for a in range(3):
        top = max(s.ranges_m[a] for s in model.structures)
        d = np.linspace(top / 40.0, 1.5 * top, LAGS_PER_AXIS)
        out.append(d[:, None] * model.axes[a][None, :])
    return np.concatenate(out)


def grade_model(model: Model, gamma_z) -> tuple[Model, float]:
    """A model of ``model``'s axes, shapes and structure count fitted to ``gamma_z`` (a function of
    lag vectors), nugget fixed at gamma_z just off zero; and the largest relative misfit at the lags."""
    from .fit import fit_lag_vectors

    h = _lags(model)
    target = gamma_z(h)
    shortest = min(min(s.ranges_m) for s in model.structures)
    nugget = float(gamma_z(1e-6 * shortest * model.axes[:1])[0]) if model.nugget > 0 else 0.0
    total = float(gamma_z(1e6 * max(s.ranges_m[0] for s in model.structures) * model.axes[:1])[0])
    share = [s.sill / max(sum(t.sill for t in model.structures), 1e-300) for s in model.structures]
    start = [(max(total - nugget, 1e-12 * total) * f, *s.ranges_m) for f, s in zip(share, model.structures)]
    fitted, _, _ = fit_lag_vectors(h, target, np.ones(len(target)), nugget, model.axes, len(model.structures),
                                   model.structures[0].shape, start, max_range=10 * max(s.ranges_m[0]
                                                                                       for s in model.structures))
    misfit = float(np.max(np.abs(fitted.gamma(h) - target) / np.maximum(target, 1e-12 * total)))
    return fitted, misfit


LOG_ASSUMPTION = ("the grades are lognormal: their logarithms Gaussian, jointly at any set of points (a multivariate "
                  "Gaussian Y = ln Z); then C_Z(h) = m^2 (exp(C_Y(h)) - 1) with m the declustered mean of the grades "
                  "(Journel and Huijbregts 1978)")
HERMITE_METHOD = ("the normal-score model through the Hermite expansion of the declustered anamorphosis, "
                  f"{HERMITE_TERMS} terms: C_Z(h) = sum phi_n^2 rho(h)^n (Rivoirard 1994; Wackernagel 2003); it "
                  "assumes the normal scores bivariate Gaussian")


def back_transform(model: Model, kind: str, raw_values, weights=None) -> dict | None:
    """The grades' model for a model fitted under ``--transform kind`` (log or normal-score), as a
    model.json fragment with the method, the assumption and the fit's largest relative misfit."""
    raw = np.asarray(raw_values, dtype=np.float64)
    w = np.ones(len(raw)) if weights is None else np.asarray(weights, dtype=np.float64)
    ok = np.isfinite(raw) & (w > 0)
    mean = float(np.sum(w[ok] * raw[ok]) / np.sum(w[ok]))
    if kind == "log":
        fitted, misfit = grade_model(model, lambda h: lognormal_gamma(model, mean, h))
        sill = mean * mean * (math.exp(model.sill) - 1.0)
        method, note = "lognormal relation", LOG_ASSUMPTION
    elif kind == "normal-score":
        phi = hermite_coefficients(raw[ok], w[ok])
        fitted, misfit = grade_model(model, lambda h: hermite_gamma(model, phi, h))
        sill = float(np.sum(phi[1:] ** 2))
        method, note = "Hermite expansion", HERMITE_METHOD
    else:
        return None
    return {**fitted.to_json(), "method": method, "assumption": note, "mean": mean, "sill_of_the_relation": sill,
            "largest_relative_misfit": misfit}


__all__ = ["hermite_coefficients", "lognormal_gamma", "hermite_gamma", "grade_model", "back_transform"]
