"""Variogram models and their fit (CHECKS.md, "Variogram models")."""

import math

import numpy as np
import pytest

from engine.fit import fit_lag_vectors
from engine.model import Model, Structure, unit_variogram
from engine.orientation import axes_from_plane


def test_shapes_at_published_points():
    # published: Journel and Huijbregts, Mining Geostatistics, 1978 (spherical);
    # Isaaks and Srivastava, An Introduction to Applied Geostatistics, 1989 (practical ranges)
    a = 60.0
    assert unit_variogram("spherical", np.array([0.5, 1.0, 2.0])).tolist() == [0.6875, 1.0, 1.0]
    assert float(unit_variogram("exponential", 1.0)) == pytest.approx(0.950213, abs=1e-6)
    assert float(unit_variogram("gaussian", 1.0)) == pytest.approx(0.950213, abs=1e-6)
    m = Model(0.0, [Structure("spherical", 2.0, (a, a, a))])
    assert m.gamma_along([1, 0, 0], [a / 2, a, 2 * a]).tolist() == pytest.approx([1.375, 2.0, 2.0], abs=1e-12)


def test_anisotropic_ranges_along_rotated_axes():
    axes = axes_from_plane(120.0, 35.0, 30.0)
    m = Model(0.1, [Structure("exponential", 0.9, (150.0, 60.0, 20.0))], axes)
    for a, r in enumerate((150.0, 60.0, 20.0)):
        assert float(m.gamma_along(axes[a], r)[0]) == pytest.approx(0.1 + 0.9 * 0.950213, abs=1e-6)
        assert m.range_along(axes[a]) == pytest.approx(r, rel=1e-12)
    assert float(m.gamma(np.zeros((1, 3)))[0]) == 0.0  # no nugget at h = 0
    assert m.problems() == []


def test_covariance_matrix_is_positive_definite_on_random_points():
    # analytic: a valid model gives a covariance matrix with no negative eigenvalue beyond round-off
    rng = np.random.default_rng(2)
    points = rng.uniform(0, 200, (300, 3))
    axes = axes_from_plane(40.0, 60.0, 75.0)
    m = Model(0.2, [Structure("spherical", 0.5, (90.0, 40.0, 15.0)),
                    Structure("gaussian", 0.3, (200.0, 120.0, 50.0))], axes)
    h = (points[:, None, :] - points[None, :, :]).reshape(-1, 3)
    c = m.covariance(h).reshape(300, 300)
    eig = np.linalg.eigvalsh(c)
    assert eig.min() > -1e-9 * eig.max()


def test_problems_are_reported():
    m = Model(-0.1, [Structure("cubic", -1.0, (10.0, 0.0, 5.0))], np.diag([1.0, 1.0, -1.0]))
    text = " ".join(m.problems())
    for word in ("nugget", "unknown shape", "sill", "ranges", "right-handed"):
        assert word in text


def test_noiseless_nested_fit_recovers_the_parameters():
    # analytic (CHECKS.md): 0.2 + sph(0.5, 60) + sph(0.3, 220) sampled on lags, recovered to 1e-4
    lags = np.arange(1, 61) * 5.0
    h = np.c_[lags, np.zeros_like(lags), np.zeros_like(lags)]
    truth = Model(0.2, [Structure("spherical", 0.5, (60.0, 60.0, 60.0)),
                        Structure("spherical", 0.3, (220.0, 220.0, 220.0))])
    gamma = truth.gamma(h)
    model, wrss, _ = fit_lag_vectors(h, gamma, np.ones_like(lags), None, np.eye(3), 2, "spherical",
                                     [(0.4, 40.0, 40.0, 40.0), (0.4, 150.0, 150.0, 150.0)], max_range=1000.0,
                                     nugget_start=0.1, tolerance=1e-12)
    assert model.nugget == pytest.approx(0.2, abs=1e-4)
    got = sorted((s.ranges_m[0], s.sill) for s in model.structures)
    assert got[0][0] == pytest.approx(60.0, abs=1e-4) and got[0][1] == pytest.approx(0.5, abs=1e-4)
    assert got[1][0] == pytest.approx(220.0, abs=1e-4) and got[1][1] == pytest.approx(0.3, abs=1e-4)
    assert wrss < 1e-12


def test_noiseless_anisotropic_fit_recovers_rotation_and_ranges():
    # analytic: lag vectors on a grid, the model's own values, a start 10 degrees off
    axes = axes_from_plane(120.0, 35.0, 30.0)
    truth = Model(0.1, [Structure("spherical", 0.9, (120.0, 60.0, 25.0))], axes)
    g = np.arange(-6, 7) * 12.0
    h = np.stack(np.meshgrid(g, g, g, indexing="ij"), -1).reshape(-1, 3)
    h = h[np.linalg.norm(h, axis=1) > 0]
    start_axes = axes_from_plane(128.0, 30.0, 38.0)
    model, _, _ = fit_lag_vectors(h, truth.gamma(h), np.ones(len(h)), 0.1, start_axes, 1, "spherical",
                                  [(0.8, 100.0, 50.0, 20.0)], fit_rotation=True, max_range=500.0,
                                  tolerance=1e-12)
    for a in range(3):
        angle = math.degrees(math.acos(min(1.0, abs(float(model.axes[a] @ axes[a])))))
        assert angle < 1e-3
    assert model.structures[0].ranges_m == pytest.approx((120.0, 60.0, 25.0), rel=1e-5)


def test_effective_range_of_single_and_nested_models():
    m = Model(0.1, [Structure("spherical", 0.9, (120.0, 60.0, 25.0))], np.eye(3))
    # a spherical structure reaches 95% of its sill before its range: 1.5 r - 0.5 r^3 = 0.95
    r = 0.8114014
    assert m.effective_range([1, 0, 0]) == pytest.approx(120.0 * r, rel=1e-6)
    assert m.effective_range([0, 0, 1]) == pytest.approx(25.0 * r, rel=1e-6)
    e = Model(0.0, [Structure("exponential", 1.0, (50.0, 50.0, 50.0))])
    # 1 - exp(-3 r) = 0.95 at r = ln(20) / 3, just short of the practical range (0.950213 at r = 1)
    assert e.effective_range([0, 1, 0]) == pytest.approx(50.0 * math.log(20.0) / 3.0, rel=1e-9)


def test_rotation_round_trips_to_1e_12():
    # analytic: axes -> (dip direction, dip, pitch) -> axes returns the same lines, and the angles
    # -> axes -> angles the same angles; model.json's form reads back to the same model
    from scipy.spatial.transform import Rotation

    from engine.orientation import orientation_from_axes

    rng = np.random.default_rng(12)
    for matrix in Rotation.random(200, random_state=12).as_matrix():
        axes = matrix.T  # rows: three orthonormal right-handed axes
        o = orientation_from_axes(axes)
        back = axes_from_plane(o["plane"]["dip_direction"], o["plane"]["dip"], o["pitch"])
        for a in range(3):
            assert abs(abs(float(back[a] @ axes[a])) - 1.0) < 1e-12
        again = orientation_from_axes(back)
        for key in ("dip_direction", "dip"):
            assert again["plane"][key] == pytest.approx(o["plane"][key], abs=1e-12)
        assert again["pitch"] == pytest.approx(o["pitch"], abs=1e-12)
    m = Model(0.1, [Structure("spherical", 0.5, (90.0, 40.0, 15.0)),
                    Structure("exponential", 0.4, (200.0, 90.0, 30.0))], axes_from_plane(33.0, 61.0, 142.0))
    read = Model.from_json(m.to_json())
    h = rng.normal(0, 80, (500, 3))
    assert np.allclose(read.gamma(h), m.gamma(h), rtol=0, atol=1e-12)
