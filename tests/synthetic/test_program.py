"""The synthetic drill programs: seeded, valid, and carrying the variogram they claim."""

import json

import numpy as np
import pandas as pd
import pytest

from engine.orientation import axes_from_plane
from engine.tables import read_tables
from synthetic_holes import (FieldSpec, ProgramSpec, SpectralField, Structure, covariance, generate_program,
                             spectral_frequencies)

SMALL = dict(n_along=5, n_lines=4, hole_length_m=80.0)


@pytest.mark.parametrize("shape", ["spherical", "exponential", "gaussian"])
def test_spectral_frequencies_reproduce_the_covariance(shape):
    # analytic (Bochner): the mean of cos(w . h) over the spectral measure is the correlation C(h).
    rng = np.random.default_rng(1)
    w = spectral_frequencies(shape, 200_000, rng)
    for r in [0.1, 0.25, 0.5, 0.75, 1.0, 1.5]:
        h = np.array([r, 0.0, 0.0])
        assert abs(np.cos(w @ h).mean() - covariance(shape, r)) < 0.01, (shape, r)


def test_model_values_from_the_literature():
    # published: spherical at a/2 is 0.6875 C (Journel and Huijbregts 1978); exponential and
    # gaussian at the practical range reach 0.950213 C (Isaaks and Srivastava 1989)
    assert 1 - covariance("spherical", 0.5) == pytest.approx(0.6875, abs=1e-12)
    assert 1 - covariance("exponential", 1.0) == pytest.approx(0.950213, abs=1e-6)
    assert 1 - covariance("gaussian", 1.0) == pytest.approx(0.950213, abs=1e-6)


def test_field_anisotropy_follows_the_axes_and_ranges():
    # the realisation's own variogram, sum over structures of sill (1 - mean cos(w . h)), along each
    # axis: 0.6875 of the sill at half the spherical range and the whole sill at the range
    axes = axes_from_plane(120.0, 35.0, 30.0)
    ranges = (150.0, 60.0, 12.0)
    field = SpectralField([("spherical", 1.0, ranges)], axes, np.random.default_rng(2), features=100_000)
    world, _, _ = field._parts[0]
    for axis, r in zip(axes, ranges):
        for fraction, expected in ((0.5, 0.6875), (1.0, 1.0), (1.4, 1.0)):
            gamma = 1 - np.cos(world @ (fraction * r * axis)).mean()
            assert abs(gamma - expected) < 0.02, (r, fraction, gamma)


def test_line_average_equals_mean_of_dense_points():
    axes = axes_from_plane(10.0, 60.0, 80.0)
    field = SpectralField([("exponential", 1.0, (30.0, 20.0, 5.0))], axes, np.random.default_rng(3), features=500)
    rng = np.random.default_rng(4)
    mid = rng.uniform(-100, 100, (20, 3))
    direction = rng.normal(size=(20, 3))
    direction /= np.linalg.norm(direction, axis=1)[:, None]
    length = rng.uniform(0.5, 3.0, 20)
    averaged = field.values(mid, direction, length)
    s = (np.arange(4000) + 0.5) / 4000 - 0.5
    for i in range(20):
        points = mid[i] + np.outer(s * length[i], direction[i])
        assert averaged[i] == pytest.approx(field.values(points).mean(), abs=1e-5)


def test_same_seed_same_program_and_other_seed_differs():
    a = generate_program(ProgramSpec(**SMALL), seed=5)
    b = generate_program(ProgramSpec(**SMALL), seed=5)
    c = generate_program(ProgramSpec(**SMALL), seed=6)
    pd.testing.assert_frame_equal(a.intervals, b.intervals)
    pd.testing.assert_frame_equal(a.surveys, b.surveys)
    assert not a.intervals["au_gpt"].equals(c.intervals["au_gpt"])


def test_written_program_is_valid_and_has_what_it_claims(tmp_path):
    spec = ProgramSpec(n_along=8, n_lines=6, along_m=20.0, across_m=80.0, line_azimuth_deg=60.0)
    program = generate_program(spec, seed=8)
    paths = program.write(tmp_path)
    tables = read_tables(paths["collars"], paths["surveys"], paths["intervals"])
    assert tables.error_count == 0, tables.findings.to_string()
    assert set(tables.value_columns) == {"au_gpt", "density"}
    assert set(tables.category_columns) == {"domain", "lith"}
    intervals = program.intervals
    # irregular lengths and unsampled gaps
    lengths = (intervals["to"] - intervals["from"]).round(2)
    assert lengths.nunique() >= 4
    following = intervals.groupby("hole_id")["from"].shift(-1)
    assert ((following - intervals["to"]) > 0.5).sum() > 10
    assert set(intervals["domain"]) == {"OXIDE", "FRESH"}
    assert intervals["density"].isna().any()
    # inclined holes with drift: dip flattens down the hole
    s = program.surveys
    first = s.groupby("hole_id")["dip"].first()
    last = s.groupby("hole_id")["dip"].last()
    assert (first < -50).all() and (last > first).mean() > 0.9
    # fences: 20 m along the lines, 80 m across them
    c = program.collars[["east", "north"]].to_numpy()
    d = np.linalg.norm(c[:, None] - c[None], axis=2)
    np.fill_diagonal(d, np.inf)
    assert 14 < np.median(d.min(axis=1)) < 26
    truth = json.loads(paths["truth"].read_text())
    model = truth["model"]
    assert model["range_convention"] == "practical" and model["nugget"] == 0.15
    major = np.array(model["axes"]["major"])
    assert np.allclose(major, axes_from_plane(120.0, 35.0, 30.0)[0])
    assert truth["counts"]["intervals"] == len(intervals)


def test_grade_statistics_follow_the_model():
    spec = ProgramSpec(n_along=14, n_lines=14, field=FieldSpec(mean={"OXIDE": 6.0, "FRESH": 6.0}))
    grades = generate_program(spec, seed=11).intervals["au_gpt"]
    total_sill = 0.15 + 0.45 + 0.40
    assert abs(grades.mean() - 6.0) < 0.5
    assert 0.5 * total_sill < grades.var() < 1.5 * total_sill


def test_trend_and_lognormal_options():
    spec = ProgramSpec(**SMALL, field=FieldSpec(trend_per_100m=(3.0, 0.0, 0.0)))
    program = generate_program(spec, seed=2)
    east = program.intervals.merge(program.collars, on="hole_id")["east"]
    slope = np.polyfit(east, program.intervals["au_gpt"], 1)[0] * 100
    assert 2.0 < slope < 4.0  # 3 per 100 m east, with the field as noise
    spec = ProgramSpec(**SMALL, field=FieldSpec(lognormal=True, mean={"OXIDE": 0.0, "FRESH": 0.0}))
    program = generate_program(spec, seed=2)
    assert (program.intervals["au_gpt"] > 0).all() and program.truth["model"]["transform"] == "log"


def test_structure_ranges_are_checked():
    with pytest.raises(ValueError):
        Structure("spherical", 1.0, 10.0, 20.0, 5.0)
    with pytest.raises(ValueError):
        Structure("cubic", 1.0, 10.0, 5.0, 5.0)
