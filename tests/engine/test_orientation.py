"""Axes and their structural terms (CHECKS.md, "Rotation of the anisotropy ellipsoid")."""

import numpy as np
import pytest
from scipy.spatial.transform import Rotation

from engine.orientation import axes_from_plane, orientation_from_axes, trend_plunge, vector_from_trend_plunge


def test_pitch_in_a_dipping_plane():
    # analytic: plane dip direction 090, dip 30, pitch 45 -> plunge asin(sin 45 sin 30) = 20.7048,
    # trend 40.8934
    major = axes_from_plane(90.0, 30.0, 45.0)[0]
    trend, plunge = trend_plunge(major)
    assert abs(plunge - np.degrees(np.arcsin(np.sin(np.radians(45)) * np.sin(np.radians(30))))) < 1e-10
    assert round(plunge, 4) == 20.7048 and round(trend, 4) == 40.8934


def test_trend_plunge_vector():
    # analytic: trend 45, plunge 30 -> (E, N, Up) = (0.612372, 0.612372, -0.5)
    assert np.allclose(vector_from_trend_plunge(45.0, 30.0), [0.612372, 0.612372, -0.5], atol=1e-6)
    assert trend_plunge([0.612372, 0.612372, -0.5]) == pytest.approx((45.0, 30.0), abs=1e-4)
    assert trend_plunge([-0.612372, -0.612372, 0.5]) == pytest.approx((45.0, 30.0), abs=1e-4)  # a line


def test_interface_example_orientation():
    # the worked example of INTERFACE.md's model.json: plane 18.5 / 36.8, pitch 20.3
    o = orientation_from_axes(axes_from_plane(18.5, 36.8, 20.3))
    assert o["major"]["trend"] == pytest.approx(305.0, abs=0.05)
    assert o["major"]["plunge"] == pytest.approx(12.0, abs=0.05)
    assert o["minor"]["trend"] == pytest.approx(198.5, abs=0.05)
    assert np.allclose(o["axes"]["major"], [-0.801, 0.561, -0.208], atol=1e-3)


def test_axes_orthonormal_right_handed_and_round_trip():
    rng = np.random.default_rng(4)
    for _ in range(200):
        dd, dip, pitch = rng.uniform(0, 360), rng.uniform(0.5, 89.5), rng.uniform(0.5, 179.5)
        axes = axes_from_plane(dd, dip, pitch)
        assert np.allclose(axes @ axes.T, np.eye(3), atol=1e-12)
        assert np.allclose(np.cross(axes[0], axes[1]), axes[2], atol=1e-12)
        o = orientation_from_axes(axes)
        assert o["plane"]["dip_direction"] == pytest.approx(dd, abs=1e-9)
        assert o["plane"]["dip"] == pytest.approx(dip, abs=1e-9)
        assert o["pitch"] == pytest.approx(pitch, abs=1e-9)
        # any sign flips of the axes give the same orientation
        flipped = axes * rng.choice([-1.0, 1.0], size=(3, 1))
        assert np.allclose(orientation_from_axes(flipped)["axes"]["major"], o["axes"]["major"], atol=1e-12)


def test_matches_scipy_rotation_of_elementary_rotations():
    # reference library: scipy's Rotation composed from elementary rotations. At dip direction 090,
    # dip 0, pitch 0 the axes (major, semi-major, minor) are (north, east, down): the matrix BASE.
    # Then, in the axes' own frame, pitch about the minor axis (z) and dip about the strike (x); then
    # turn the whole about the vertical, clockwise from above, by dip direction - 90.
    base = Rotation.from_matrix(np.array([[0.0, 1.0, 0.0], [1.0, 0.0, 0.0], [0.0, 0.0, -1.0]]))
    rng = np.random.default_rng(9)
    for _ in range(100):
        dd, dip, pitch = rng.uniform(0, 360), rng.uniform(0, 90), rng.uniform(0, 180)
        r = (Rotation.from_euler("z", -(dd - 90.0), degrees=True) * base
             * Rotation.from_euler("x", dip, degrees=True) * Rotation.from_euler("z", pitch, degrees=True))
        assert np.allclose(r.as_matrix().T, axes_from_plane(dd, dip, pitch), atol=1e-12, rtol=0)
