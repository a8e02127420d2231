"""A plain per-hole, per-station Python desurvey (math module only), written for clarity.

It follows the formulas of Sawaryn and Thorogood (SPE-84246-PA, 2005) literally: inclination and
azimuth at each station, the dogleg from the spherical law of cosines, the ratio factor, and the
displacement in (north, east, down). It is the reference for tests and the baseline of the
desurvey benchmark.
"""

import math


def station_direction(azimuth_deg, dip_deg):
    """(east, north, up) for a negative-down dip."""
    inc = math.radians(90.0 + dip_deg)  # inclination from vertical
    az = math.radians(azimuth_deg)
    return (math.sin(inc) * math.sin(az), math.sin(inc) * math.cos(az), -math.cos(inc))


def min_curvature_step(md1, inc1_deg, az1_deg, md2, inc2_deg, az2_deg):
    """(dNorth, dEast, dTVD, dogleg_deg, ratio_factor) between two stations given by inclination."""
    i1, i2 = math.radians(inc1_deg), math.radians(inc2_deg)
    a1, a2 = math.radians(az1_deg), math.radians(az2_deg)
    cos_b = math.cos(i2 - i1) - math.sin(i1) * math.sin(i2) * (1.0 - math.cos(a2 - a1))
    b = math.acos(max(-1.0, min(1.0, cos_b)))
    rf = 1.0 + b * b / 12.0 if b < 1e-6 else (2.0 / b) * math.tan(b / 2.0)
    dmd = md2 - md1
    dn = dmd / 2.0 * (math.sin(i1) * math.cos(a1) + math.sin(i2) * math.cos(a2)) * rf
    de = dmd / 2.0 * (math.sin(i1) * math.sin(a1) + math.sin(i2) * math.sin(a2)) * rf
    dv = dmd / 2.0 * (math.cos(i1) + math.cos(i2)) * rf
    return dn, de, dv, math.degrees(b), rf


def desurvey_hole(collar, stations, method="minimum-curvature"):
    """Station positions (east, north, up) of one hole.

    collar: (x, y, z); stations: list of (depth, azimuth, dip) sorted by depth, dip negative down.
    """
    x, y, z = collar
    d0, az0, dip0 = stations[0]
    e, n, u = station_direction(az0, dip0)
    x, y, z = x + d0 * e, y + d0 * n, z + d0 * u
    out = [(x, y, z)]
    for (md1, az1, dip1), (md2, az2, dip2) in zip(stations[:-1], stations[1:]):
        i1, i2 = 90.0 + dip1, 90.0 + dip2
        if method == "minimum-curvature":
            dn, de, dv, _, _ = min_curvature_step(md1, i1, az1, md2, i2, az2)
        else:
            t1 = station_direction(az1, dip1)
            t2 = station_direction(az2, dip2)
            dmd = md2 - md1
            if method == "balanced-tangential":
                de, dn, du = (dmd / 2.0 * (p + q) for p, q in zip(t1, t2))
            else:  # tangential: the lower station's direction
                de, dn, du = (dmd * q for q in t2)
            dv = -du
        x, y, z = x + de, y + dn, z - dv
        out.append((x, y, z))
    return out


def desurvey_program(collars, stations_by_hole, method="minimum-curvature"):
    """Per-hole loop: ``collars`` maps hole -> (x, y, z); returns hole -> list of positions."""
    return {hole: desurvey_hole(collars[hole], stations, method) for hole, stations in stations_by_hole.items()}
