"""Unit axes of an anisotropy ellipsoid and the structural-geology terms a geologist reads.

Vectors are (east, north, up). Trend is degrees clockwise from north; plunge is degrees below
horizontal (0-90), taking the downward sense of the line. The plane holding the major and semi-major
axes is given by its dip direction and dip; the pitch of the major axis is measured in that plane
from the strike line that lies 90 degrees anticlockwise of the dip direction (right-hand rule),
towards the down-dip line. See docs/conventions.md.

Axes are returned right-handed: ``minor = major x semi_major``, with the semi-major axis 90 degrees
of pitch beyond the major and the minor axis the downward normal of the plane.

Example
-------
>>> axes = axes_from_plane(90.0, 30.0, 45.0)
>>> [round(v, 4) for v in trend_plunge(axes[0])]
[40.8934, 20.7048]
"""

from __future__ import annotations

import numpy as np


def vector_from_trend_plunge(trend_deg: float, plunge_deg: float) -> np.ndarray:
    """Unit vector (east, north, up) pointing along ``trend`` and ``plunge`` degrees down."""
    t, p = np.radians(trend_deg), np.radians(plunge_deg)
    return np.array([np.cos(p) * np.sin(t), np.cos(p) * np.cos(t), -np.sin(p)])


def trend_plunge(vector) -> tuple[float, float]:
    """Trend and plunge (degrees) of the line along ``vector``, taking its downward sense."""
    v = np.asarray(vector, dtype=np.float64)
    v = v / np.linalg.norm(v)
    if v[2] > 0:
        v = -v
    plunge = np.degrees(np.arcsin(np.clip(-v[2], -1.0, 1.0)))
    horizontal = np.hypot(v[0], v[1])
    trend = np.degrees(np.arctan2(v[0], v[1])) % 360.0 if horizontal > 1e-12 else 0.0
    if abs(v[2]) < 1e-12:  # a horizontal line: report the trend in [0, 180)
        trend %= 180.0
    return float(trend), float(plunge)


def _strike_and_dip_vectors(dip_direction_deg: float, dip_deg: float):
    dd, dip = np.radians(dip_direction_deg), np.radians(dip_deg)
    strike = np.array([np.sin(dd - np.pi / 2), np.cos(dd - np.pi / 2), 0.0])
    down_dip = np.array([np.cos(dip) * np.sin(dd), np.cos(dip) * np.cos(dd), -np.sin(dip)])
    return strike, down_dip


def axes_from_plane(dip_direction_deg: float, dip_deg: float, pitch_deg: float) -> np.ndarray:
    """Rows major, semi-major, minor (unit, right-handed) from plane and pitch, degrees."""
    strike, down_dip = _strike_and_dip_vectors(dip_direction_deg, dip_deg)
    p = np.radians(pitch_deg)
    major = np.cos(p) * strike + np.sin(p) * down_dip
    semi = -np.sin(p) * strike + np.cos(p) * down_dip
    return np.stack([major, semi, np.cross(major, semi)])


def orientation_from_axes(axes) -> dict:
    """Structural terms of three orthogonal axes (rows major, semi-major, minor).

    Returns ``{"major": {"trend", "plunge"}, "semi_major": ..., "minor": ..., "plane":
    {"dip_direction", "dip"}, "pitch"}`` in degrees, and the axes re-signed to the canonical
    right-handed form under ``"axes"``.
    """
    a = np.asarray(axes, dtype=np.float64)
    major, minor = a[0] / np.linalg.norm(a[0]), a[2] / np.linalg.norm(a[2])
    up_normal = -minor if minor[2] < 0 else minor
    dip = float(np.degrees(np.arccos(np.clip(up_normal[2], -1.0, 1.0))))
    if np.hypot(up_normal[0], up_normal[1]) > 1e-12:
        dip_direction = float(np.degrees(np.arctan2(up_normal[0], up_normal[1])) % 360.0)
    else:  # horizontal plane: take the dip direction so that the major axis is the strike line
        dip_direction = float((np.degrees(np.arctan2(major[0], major[1])) + 90.0) % 360.0)
    strike, down_dip = _strike_and_dip_vectors(dip_direction, dip)
    pitch = float(np.degrees(np.arctan2(major @ down_dip, major @ strike)))
    if pitch < 0:
        pitch += 180.0
    canonical = axes_from_plane(dip_direction, dip, pitch)
    names = ("major", "semi_major", "minor")
    out = {name: dict(zip(("trend", "plunge"), trend_plunge(v))) for name, v in zip(names, canonical)}
    out["plane"] = {"dip_direction": dip_direction, "dip": dip}
    out["pitch"] = pitch
    out["axes"] = {name: v.tolist() for name, v in zip(names, canonical)}
    return out
