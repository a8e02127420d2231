"""Desurvey against outside sources (CHECKS.md, "Desurvey") and a slow obvious reference."""

import math
import os
import subprocess
import sys

import numpy as np
import pandas as pd
import pytest

from engine.desurvey import METHODS, Desurvey, direction_vectors
from tests.reference.desurvey_reference import desurvey_hole, min_curvature_step


def one_hole(stations, depth=None, x=0.0, y=0.0, z=0.0, hole="A"):
    """Collar and survey frames for one hole; stations = [(depth, azimuth, dip), ...]."""
    at = [s[0] for s in stations]
    collars = pd.DataFrame({"hole": [hole], "x": [x], "y": [y], "z": [z], "depth": [depth or max(at)]})
    surveys = pd.DataFrame({"hole": hole, "survey_depth": at, "azimuth": [s[1] for s in stations],
                            "dip": [s[2] for s in stations]})
    return collars, surveys


# --- published: Lapeyrouse, Formulas and Calculations for Drilling, Production and Workover,
# 2nd ed., Gulf Professional Publishing, 2002 (worked example). Inclination 15 -> dip -75, 25 -> -65.
PUBLISHED = {
    "minimum-curvature": (27.22, 19.45, 94.01),
    "balanced-tangential": (27.10, 19.37, 93.61),
    "tangential": (29.88, 29.88, 90.63),
}


@pytest.mark.parametrize("method", METHODS)
def test_published_two_station_example(method):
    collars, surveys = one_hole([(3500.0, 20.0, -75.0), (3600.0, 45.0, -65.0)])
    xyz = Desurvey(method).fit(collars, surveys).xyz_
    d_east, d_north, d_up = xyz[1] - xyz[0]
    north, east, tvd = PUBLISHED[method]
    assert abs(d_north - north) <= 0.01 and abs(d_east - east) <= 0.01 and abs(-d_up - tvd) <= 0.01


def test_published_dogleg_and_ratio_factor():
    # published: same worked example: dogleg 12.95 deg, ratio factor 1.00428 (the formula's value;
    # one reproduction misprints it as 1.00408)
    _, _, _, dogleg, rf = min_curvature_step(3500, 15, 20, 3600, 25, 45)
    assert abs(dogleg - 12.95) < 0.005
    assert abs(rf - 1.00428) < 5e-6


def test_reference_agrees_with_published_example():
    dn, de, dv, _, _ = min_curvature_step(3500, 15, 20, 3600, 25, 45)
    assert (round(dn, 2), round(de, 2), round(dv, 2)) == PUBLISHED["minimum-curvature"]


# --- analytic: a circular arc is reproduced exactly by minimum curvature, whatever the spacing
R_BUILD = 572.957795130823  # 3 deg per 30 m


@pytest.mark.parametrize("spacing", [300.0, 100.0, 30.0, 7.0, 0.5])
def test_constant_build_arc_exact_for_any_station_spacing(spacing):
    at = np.unique(np.r_[np.arange(0.0, 300.0, spacing), 300.0])
    inclination = at / 300.0 * 30.0
    collars, surveys = one_hole([(a, 0.0, i - 90.0) for a, i in zip(at, inclination)])
    trace = Desurvey().fit(collars, surveys)
    end = trace.xyz_[-1]
    assert abs(end[1] - R_BUILD * (1 - math.cos(math.radians(30)))) < 1e-9  # N = 76.761789
    assert abs(-end[2] - R_BUILD * math.sin(math.radians(30))) < 1e-9  # TVD = 286.478898
    assert abs(end[0]) < 1e-9
    # positions between stations lie on the same arc, not on the chords
    md = np.linspace(0.0, 300.0, 97)
    p = trace.positions(np.zeros(len(md), dtype=int), md)
    theta = np.radians(md / 300.0 * 30.0)
    assert np.allclose(p[:, 1], R_BUILD * (1 - np.cos(theta)), atol=1e-9, rtol=0)
    assert np.allclose(-p[:, 2], R_BUILD * np.sin(theta), atol=1e-9, rtol=0)


def test_published_formula_values():
    assert round(R_BUILD * (1 - math.cos(math.radians(30))), 6) == 76.761789
    assert round(R_BUILD * math.sin(math.radians(30)), 6) == 286.478898


def test_horizontal_quarter_turn():
    # analytic: at inclination 90 (dip 0), azimuth 0 -> 90 over a quarter circle of radius 100 m
    length = 50.0 * math.pi
    collars, surveys = one_hole([(0.0, 0.0, 0.0), (length, 90.0, 0.0)])
    trace = Desurvey().fit(collars, surveys)
    assert np.allclose(trace.xyz_[1], [100.0, 100.0, 0.0], atol=1e-9)
    _, _, _, _, rf = min_curvature_step(0.0, 90.0, 0.0, length, 90.0, 90.0)
    assert abs(rf - 4.0 / math.pi) < 1e-12
    # mid-depth on the arc: 45 degrees round the circle centred at (100, 0)
    mid = trace.positions([0], [length / 2])[0]
    assert np.allclose(mid, [100 - 100 * math.cos(math.pi / 4), 100 * math.sin(math.pi / 4), 0.0], atol=1e-9)


@pytest.mark.parametrize("dogleg_deg", [0.0, 1e-12, 1e-8, 1e-5, 1e-3])
def test_small_dogleg_limit_has_no_nan(dogleg_deg):
    # analytic: RF = 1 + b^2/12 + b^4/120 as b -> 0; the step tends to the straight line
    collars, surveys = one_hole([(0.0, 45.0, -60.0), (50.0, 45.0, -60.0 + dogleg_deg)])
    trace = Desurvey().fit(collars, surveys)
    p = trace.positions([0] * 5, [0.0, 10.0, 25.0, 49.999, 50.0])
    assert np.isfinite(p).all() and np.isfinite(trace.xyz_).all()
    t = direction_vectors([45.0], [-60.0])[0]
    assert np.allclose(p[2], 25.0 * t, atol=1e-6)


def test_ratio_factor_series():
    from engine.desurvey import _ratio_factor

    for b in [0.0, 1e-9, 5e-5, 2e-4, 1e-2, 0.5, 2.0]:
        exact = 1.0 if b == 0 else math.tan(b / 2) / (b / 2)
        assert abs(_ratio_factor(b) - exact) < 1e-13
        if b <= 1e-2:  # the series' next term is 17 b^6 / 20160
            assert abs(_ratio_factor(b) - (1 + b * b / 12 + b**4 / 120)) < 1e-14


def test_vertical_and_straight_inclined_holes():
    collars, surveys = one_hole([(0.0, 123.0, -90.0), (100.0, 321.0, -90.0)], x=10, y=20, z=300)
    p = Desurvey().fit(collars, surveys).positions([0, 0], [40.0, 150.0])
    assert np.allclose(p, [[10, 20, 260], [10, 20, 150]], atol=1e-9)
    # common practice: dip -60 to azimuth 90 -> (E, N, Up) = (cos 60, 0, -sin 60) per metre
    collars, surveys = one_hole([(0.0, 90.0, -60.0), (200.0, 90.0, -60.0)])
    for method in METHODS:
        p = Desurvey(method).fit(collars, surveys).positions([0], [100.0])[0]
        assert np.allclose(p, [50.0, 0.0, -100 * math.sin(math.radians(60))], atol=1e-9)


def test_mining_direction_convention():
    # common practice: dip -60 = inclination 30; direction (cos d sin A, cos d cos A, sin d)
    d = math.radians(-60.0)
    a = math.radians(30.0)
    assert np.allclose(direction_vectors([30.0], [-60.0])[0],
                       [math.cos(d) * math.sin(a), math.cos(d) * math.cos(a), math.sin(d)])
    assert np.allclose(direction_vectors([30.0], [60.0], "positive-down"), direction_vectors([30.0], [-60.0]))
    assert np.allclose(direction_vectors([20.0], [-60.0], azimuth_offset_deg=10.0), direction_vectors([30.0], [-60.0]))


def test_dip_convention_and_azimuth_offset_change_the_trace_as_expected():
    stations = [(0.0, 10.0, -70.0), (60.0, 20.0, -65.0), (120.0, 35.0, -58.0)]
    collars, surveys = one_hole(stations)
    base = Desurvey().fit(collars, surveys).positions([0], [90.0])
    flipped = surveys.assign(dip=-surveys["dip"])
    same = Desurvey(dip_convention="positive-down").fit(collars, flipped).positions([0], [90.0])
    assert np.allclose(base, same, atol=1e-12)
    shifted = surveys.assign(azimuth=surveys["azimuth"] - 15.0)
    offset = Desurvey(azimuth_offset_deg=15.0).fit(collars, shifted).positions([0], [90.0])
    assert np.allclose(base, offset, atol=1e-9)


def curving_program(rng, n_holes=30):
    collars, surveys = [], []
    for h in range(n_holes):
        n = int(rng.integers(1, 12))
        at = np.sort(rng.uniform(0, 300, n))
        if rng.uniform() < 0.5:
            at[0] = 0.0
        at = np.unique(at)
        az = (rng.uniform(0, 360) + np.cumsum(rng.normal(0, 8, len(at)))) % 360
        dip = np.clip(rng.uniform(-89, -30) + np.cumsum(rng.normal(0, 5, len(at))), -89.5, -5)
        collars.append((f"H{h}", *rng.uniform(-1000, 1000, 3), 320.0))
        surveys += [(f"H{h}", a, b, c) for a, b, c in zip(at, az, dip)]
    collars = pd.DataFrame(collars, columns=["hole", "x", "y", "z", "depth"])
    surveys = pd.DataFrame(surveys, columns=["hole", "survey_depth", "azimuth", "dip"])
    return collars, surveys


@pytest.mark.parametrize("method", METHODS)
def test_curving_holes_equal_slow_reference(method):
    rng = np.random.default_rng(11)
    collars, surveys = curving_program(rng)
    # shuffle the survey rows: the engine must sort them per hole
    surveys = surveys.sample(frac=1.0, random_state=3).reset_index(drop=True)
    trace = Desurvey(method).fit(collars, surveys)
    for h, row in enumerate(collars.itertuples()):
        part = surveys[surveys.hole == row.hole].sort_values("survey_depth")
        stations = list(zip(part["survey_depth"], part["azimuth"], part["dip"]))
        expected = desurvey_hole((row.x, row.y, row.z), stations, method)
        got = trace.xyz_[trace.start_[h]:trace.start_[h + 1]]
        assert np.allclose(got, expected, atol=1e-8, rtol=0)
        # the fitted positions at the station depths are the station positions
        assert np.allclose(trace.positions([h] * len(part), part["survey_depth"].to_numpy()), expected, atol=1e-8)


@pytest.mark.parametrize("method", METHODS)
def test_positions_continuous_across_stations(method):
    rng = np.random.default_rng(5)
    collars, surveys = curving_program(rng, 10)
    trace = Desurvey(method).fit(collars, surveys)
    for h in range(len(collars)):
        for d in trace.depth_[trace.start_[h]:trace.start_[h + 1]]:
            below, at, above = trace.positions([h] * 3, [d - 1e-7, d, d + 1e-7])
            assert np.linalg.norm(below - at) < 2e-7 and np.linalg.norm(above - at) < 2e-7
        # the trace never jumps: consecutive 0.5 m points are at most 0.5 m apart
        md = np.arange(0.0, 320.0, 0.5)
        p = trace.positions([h] * len(md), md)
        step = np.linalg.norm(np.diff(p, axis=0), axis=1)
        assert step.max() <= 0.5 + 1e-9 and step.min() > 0.3


def test_minimum_curvature_interpolates_on_the_arc_not_the_chord():
    length = 50.0 * math.pi
    collars, surveys = one_hole([(0.0, 0.0, 0.0), (length, 90.0, 0.0)])
    mid = Desurvey().fit(collars, surveys).positions([0], [length / 2])[0]
    chord_mid = np.array([50.0, 50.0, 0.0])
    assert np.linalg.norm(mid - chord_mid) > 20.0  # the sagitta of the quarter circle: 100 (1 - cos 45)


def test_beyond_last_and_above_first_station():
    collars, surveys = one_hole([(20.0, 0.0, -45.0), (50.0, 90.0, -30.0)], depth=80.0)
    trace = Desurvey().fit(collars, surveys)
    t_first = direction_vectors([0.0], [-45.0])[0]
    t_last = direction_vectors([90.0], [-30.0])[0]
    p = trace.positions([0, 0, 0, 0], [0.0, 20.0, 50.0, 80.0])
    assert np.allclose(p[0], [0, 0, 0], atol=1e-12)  # the collar
    assert np.allclose(p[1], 20.0 * t_first, atol=1e-12)
    assert np.allclose(p[3] - p[2], 30.0 * t_last, atol=1e-12)


def test_hole_without_surveys_uses_collar_angles_else_vertical():
    collars = pd.DataFrame({"hole": ["A", "B"], "x": [0.0, 0.0], "y": [0.0, 0.0], "z": [0.0, 0.0],
                            "depth": [10.0, 10.0], "azimuth": [90.0, np.nan], "dip": [-60.0, np.nan]})
    surveys = pd.DataFrame({"hole": [], "survey_depth": [], "azimuth": [], "dip": []})
    p = Desurvey().fit(collars, surveys).positions(["A", "B"], [10.0, 10.0])
    assert np.allclose(p[0], 10 * direction_vectors([90.0], [-60.0])[0])
    assert np.allclose(p[1], [0, 0, -10])


def test_unknown_hole_gives_nan_and_traces_cover_the_hole():
    collars, surveys = one_hole([(0.0, 90.0, -60.0), (33.3, 95.0, -58.0)], depth=40.0)
    trace = Desurvey().fit(collars, surveys)
    assert np.isnan(trace.positions(["nope"], [5.0])).all()
    traces = trace.traces(10.0)
    assert traces["depth"].tolist() == [0.0, 10.0, 20.0, 30.0, 33.3, 40.0]


def test_kernel_body_runs_with_jit_disabled():
    # the Python body of the kernels is checked too (STYLE.md, "Tests")
    code = (
        "import pandas as pd, numpy as np\n"
        "from engine.desurvey import Desurvey\n"
        "c = pd.DataFrame({'hole': ['A'], 'x': [0.0], 'y': [0.0], 'z': [0.0], 'depth': [3600.0]})\n"
        "s = pd.DataFrame({'hole': ['A', 'A'], 'survey_depth': [3500.0, 3600.0], 'azimuth': [20.0, 45.0],\n"
        "                  'dip': [-75.0, -65.0]})\n"
        "t = Desurvey().fit(c, s)\n"
        "d = t.xyz_[1] - t.xyz_[0]\n"
        "p = t.positions(['A'], [3550.0])[0]\n"
        "print(round(d[1], 2), round(d[0], 2), round(-d[2], 2), bool(np.isfinite(p).all()))\n"
    )
    env = dict(os.environ, NUMBA_DISABLE_JIT="1")
    result = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, env=env,
                            cwd=os.path.dirname(os.path.dirname(os.path.dirname(__file__))))
    assert result.returncode == 0, result.stderr
    assert result.stdout.split() == ["27.22", "19.45", "94.01", "True"]


def test_many_unordered_queries_equal_ordered_ones():
    # above 100,000 queries in no hole order the engine groups them by hole first
    rng = np.random.default_rng(21)
    collars, surveys = curving_program(rng, 40)
    trace = Desurvey().fit(collars, surveys)
    hole = rng.integers(-1, 41, 150_000)  # includes unknown holes -1 and 40
    depth = rng.uniform(-5, 330, 150_000)
    got = trace.positions(hole, depth)
    small = np.concatenate([trace.positions(hole[i:i + 50_000], depth[i:i + 50_000])
                            for i in range(0, 150_000, 50_000)])
    assert np.array_equal(np.isnan(got), np.isnan(small))
    assert np.allclose(got, small, equal_nan=True, atol=0, rtol=0)
    assert np.isnan(got[(hole < 0) | (hole >= 40)]).all()
