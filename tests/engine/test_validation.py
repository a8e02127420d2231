"""One test per validation rule: a small table that breaks it, and the finding's table, line, hole and
severity. The rules are common practice of drillhole database validation."""

import numpy as np
import pandas as pd
import pytest

from engine.desurvey import Desurvey
from engine.errors import ValidationError
from engine.tables import read_tables

from .conftest import GOOD_COLLARS, GOOD_INTERVALS, GOOD_SURVEYS, findings_of, only_finding


def read(paths, **options):
    return read_tables(paths["collars"], paths["surveys"], paths["intervals"], **options)


# ---- collars


def test_duplicate_hole_ids(write_tables):
    collars = GOOD_COLLARS + "A,120,200,50,30\n"
    tables = read(write_tables(collars=collars))
    f = findings_of(tables, "collars", "error")
    assert f["line"].tolist() == [2, 4] and set(f["hole"]) == {"A"}
    assert "lines 2, 4" in f["problem"].iloc[0]


@pytest.mark.parametrize("column", ["x", "y", "z"])
def test_collar_without_coordinate(write_tables, column):
    frame = pd.DataFrame({"hole": ["A", "B"], "x": [100, 110], "y": [200, 200], "z": [50, 50], "depth": [30, 20]})
    frame[column] = frame[column].astype(object)
    frame.loc[1, column] = ""
    tables = read(write_tables(collars=frame.to_csv(index=False)))
    line, hole, col, problem = only_finding(tables, "collars", "error")
    assert (line, hole, col) == (3, "B", column) and "no " + column in problem


@pytest.mark.parametrize("depth, words", [("", "no end-of-hole depth"), ("0", "above zero"), ("-5", "above zero")])
def test_collar_without_valid_end_depth(write_tables, depth, words):
    collars = f"hole,x,y,z,depth\nA,100,200,50,30\nB,110,200,50,{depth}\n"
    tables = read(write_tables(collars=collars))
    errors = findings_of(tables, "collars", "error")
    assert errors["line"].tolist() == [3] and errors["hole"].tolist() == ["B"]
    assert words in errors["problem"].iloc[0]


def test_implausible_coordinate(write_tables):
    collars = "hole,x,y,z,depth\nA,1e308,200,50,30\nB,110,200,50,20\n"
    line, hole, column, _ = only_finding(read(write_tables(collars=collars)), "collars", "error")
    assert (line, hole, column) == (2, "A", "x")


def test_empty_hole_id(write_tables):
    collars = GOOD_COLLARS + ",1,2,3,10\n"
    line, hole, column, problem = only_finding(read(write_tables(collars=collars)), "collars", "error")
    assert (line, hole) == (4, "") and "hole id is empty" in problem


def test_text_in_numeric_collar_column(write_tables):
    collars = "hole,x,y,z,depth\nA,100,2OO,50,30\nB,110,200,50,20\n"
    line, hole, column, problem = only_finding(read(write_tables(collars=collars)), "collars", "error")
    assert (line, hole, column) == (2, "A", "y") and "'2OO' is not a number" in problem


def test_collar_angles_out_of_range(write_tables):
    collars = "hole,x,y,z,depth,azimuth,dip\nA,100,200,50,30,400,-60\nB,110,200,50,20,0,-95\n"
    tables = read(write_tables(collars=collars))
    f = findings_of(tables, "collars", "error")
    assert f[["line", "hole", "column"]].values.tolist() == [[2, "A", "azimuth"], [3, "B", "dip"]]


# ---- surveys


def test_survey_negative_depth(write_tables):
    surveys = GOOD_SURVEYS + "A,-3,90,-60\n"
    line, hole, column, problem = only_finding(read(write_tables(surveys=surveys)), "surveys", "error")
    assert (line, hole, column) == (5, "A", "depth") and "negative" in problem


def test_survey_past_end_of_hole_is_a_warning(write_tables):
    surveys = GOOD_SURVEYS + "B,35,0,-90\n"
    tables = read(write_tables(surveys=surveys))
    assert tables.error_count == 0
    line, hole, column, problem = only_finding(tables, "surveys", "warning")
    assert (line, hole) == (5, "B") and "past the end of the hole (20 m)" in problem


@pytest.mark.parametrize("azimuth", ["360.5", "-1", "361.5"])
def test_survey_azimuth_outside_0_360(write_tables, azimuth):
    surveys = GOOD_SURVEYS.replace("A,25,92,-59", f"A,25,{azimuth},-59")
    line, hole, column, _ = only_finding(read(write_tables(surveys=surveys)), "surveys", "error")
    assert (line, hole, column) == (3, "A", "azimuth")


def test_azimuth_360_is_north(write_tables):
    # common practice: survey exports write north as 360; it is the same bearing as 0
    surveys = "hole,depth,azimuth,dip\nA,0,360,-60\nA,25,360,-60\nB,0,0,-90\n"
    tables = read(write_tables(surveys=surveys))
    assert tables.error_count == 0, tables.findings.to_string()
    north = read(write_tables(surveys=surveys.replace("360", "0")))
    a = Desurvey().fit(tables.collars, tables.surveys).positions(["A"], [25.0])
    b = Desurvey().fit(north.collars, north.surveys).positions(["A"], [25.0])
    assert np.allclose(a, b, atol=1e-9) and a[0, 1] > 200  # the hole heads north of its collar


@pytest.mark.parametrize("dip", ["-91", "90.5"])
def test_survey_dip_outside_range(write_tables, dip):
    surveys = GOOD_SURVEYS.replace("B,0,0,-90", f"B,0,0,{dip}")
    line, hole, column, _ = only_finding(read(write_tables(surveys=surveys)), "surveys", "error")
    assert (line, hole, column) == (4, "B", "dip")


def test_survey_duplicate_depths(write_tables):
    surveys = GOOD_SURVEYS + "A,25,93,-59\n"
    f = findings_of(read(write_tables(surveys=surveys)), "surveys", "error")
    assert f["line"].tolist() == [3, 5] and set(f["hole"]) == {"A"}
    assert "lines 3, 5" in f["problem"].iloc[0]


def test_survey_of_unknown_hole(write_tables):
    surveys = GOOD_SURVEYS + "Z,0,0,-90\n"
    line, hole, column, _ = only_finding(read(write_tables(surveys=surveys)), "surveys", "error")
    assert (line, hole, column) == (5, "Z", "hole")


def test_hole_without_surveys_is_a_warning(write_tables):
    surveys = "hole,depth,azimuth,dip\nA,0,90,-60\n"
    tables = read(write_tables(surveys=surveys))
    line, hole, _, problem = only_finding(tables, "collars", "warning")
    assert (line, hole) == (3, "B") and "taken as vertical" in problem
    collars = "hole,x,y,z,depth,azimuth,dip\nA,100,200,50,30,90,-60\nB,110,200,50,20,45,-70\n"
    _, _, _, problem = only_finding(read(write_tables(collars=collars, surveys=surveys)), "collars", "warning")
    assert "collar azimuth and dip are used" in problem


def test_sharp_bend_between_stations_is_a_warning(write_tables):
    surveys = "hole,depth,azimuth,dip\nA,0,90,-60\nA,12,135,-60\nB,0,0,-90\n"
    line, hole, column, problem = only_finding(read(write_tables(surveys=surveys)), "surveys", "warning")
    assert (line, hole) == (3, "A") and "line 2" in problem


# ---- intervals


def test_interval_from_not_above_to(write_tables):
    intervals = GOOD_INTERVALS.replace("A,3,5,0.75,VEIN", "A,5,3,0.75,VEIN")
    line, hole, column, problem = only_finding(read(write_tables(intervals=intervals)), "intervals", "error")
    assert (line, hole, column) == (4, "A", "to") and "from < to" in problem
    intervals = GOOD_INTERVALS.replace("A,3,5,0.75,VEIN", "A,3,3,0.75,VEIN")
    assert only_finding(read(write_tables(intervals=intervals)), "intervals", "error")[0] == 4


def test_interval_overlap_inside_a_hole(write_tables):
    intervals = GOOD_INTERVALS + "A,4.5,6,0.1,SCHIST\nB,1.9,2.0,0.1,SCHIST\n"
    f = findings_of(read(write_tables(intervals=intervals)), "intervals", "error")
    assert f[["line", "hole"]].values.tolist() == [[6, "A"], [7, "B"]]
    assert "overlaps the interval at line 4" in f["problem"].iloc[0]


def test_interval_inside_a_longer_interval_overlaps(write_tables):
    intervals = "hole,from,to,au\nA,0,10,1\nA,2,3,1\nA,10,12,1\nB,0,1,1\n"
    f = findings_of(read(write_tables(intervals=intervals)), "intervals", "error")
    assert f["line"].tolist() == [3]


def test_interval_past_end_of_hole(write_tables):
    intervals = GOOD_INTERVALS + "B,19,21,0.2,SCHIST\n"
    line, hole, column, problem = only_finding(read(write_tables(intervals=intervals)), "intervals", "error")
    assert (line, hole, column) == (6, "B", "to") and "past the end of the hole (20 m)" in problem


def test_interval_of_unknown_hole(write_tables):
    intervals = GOOD_INTERVALS + "Q,0,1,0.2,SCHIST\n"
    line, hole, column, _ = only_finding(read(write_tables(intervals=intervals)), "intervals", "error")
    assert (line, hole, column) == (6, "Q", "hole")


def test_text_in_numeric_interval_column(write_tables):
    intervals = GOOD_INTERVALS + "B,2,3,n.s.,SCHIST\n"
    line, hole, column, problem = only_finding(read(write_tables(intervals=intervals)), "intervals", "error")
    assert (line, hole, column) == (6, "B", "au") and "--missing-marker" in problem
    tables = read(write_tables(intervals=intervals), missing_markers=["n.s."])
    assert tables.error_count == 0


def test_negative_grade_is_a_warning(write_tables):
    intervals = GOOD_INTERVALS.replace("B,0,2,2.0", "B,0,2,-0.3")
    tables = read(write_tables(intervals=intervals))
    assert tables.error_count == 0
    line, hole, column, _ = only_finding(tables, "intervals", "warning")
    assert (line, hole, column) == (5, "B", "au")


def test_interval_missing_or_negative_depths(write_tables):
    intervals = GOOD_INTERVALS + "B,,3,1,SCHIST\nB,-1,0.5,1,SCHIST\n"
    f = findings_of(read(write_tables(intervals=intervals)), "intervals", "error")
    assert f[["line", "column"]].values.tolist() == [[6, "from"], [7, "from"]]


def test_hole_without_intervals_is_a_warning(write_tables):
    intervals = "hole,from,to,au\nA,0,1,1\n"
    line, hole, _, problem = only_finding(read(write_tables(intervals=intervals)), "collars", "warning")
    assert (line, hole) == (3, "B") and "no interval rows" in problem


# ---- many faults at once, and what computing commands do with them

MANY_COLLARS = """\
hole,x,y,z,depth
A,100,200,50,30
B,110,200,50,20
A,120,200,50,30
C,,200,50,20
D,130,200,50,40
"""
MANY_SURVEYS = """\
hole,depth,azimuth,dip
B,0,0,-90
B,5,370,-90
B,10,0,-95
Z,0,0,-90
D,0,10,-60
D,10,10,-60
D,10,11,-60
"""
MANY_INTERVALS = """\
hole,from,to,au
B,0,2,1
B,1.5,3,abc
B,3,2.5,1
B,18,25,1
D,0,1,-2
D,1,2,<0.05
Q,0,1,1
D,2,3,1
"""


def test_every_fault_of_a_bad_database_is_reported_in_one_pass(write_tables):
    tables = read(write_tables(MANY_COLLARS, MANY_SURVEYS, MANY_INTERVALS))
    got = sorted((r.table, int(r.line), r.hole, r.severity) for r in tables.findings.itertuples())
    expected = sorted([
        ("collars", 2, "A", "error"), ("collars", 4, "A", "error"),  # duplicate id
        ("collars", 5, "C", "error"),  # no x
        ("collars", 2, "A", "warning"), ("collars", 4, "A", "warning"),  # no surveys
        ("collars", 5, "C", "warning"),  # no surveys
        ("collars", 2, "A", "warning"), ("collars", 4, "A", "warning"),  # no intervals
        ("collars", 5, "C", "warning"),  # no intervals
        ("surveys", 3, "B", "error"),  # azimuth 370
        ("surveys", 4, "B", "error"),  # dip -95
        ("surveys", 5, "Z", "error"),  # unknown hole
        ("surveys", 7, "D", "error"), ("surveys", 8, "D", "error"),  # duplicate depth
        ("intervals", 3, "B", "error"),  # overlap
        ("intervals", 3, "B", "error"),  # text in au
        ("intervals", 4, "B", "error"),  # from > to
        ("intervals", 5, "B", "error"),  # past end of hole
        ("intervals", 6, "D", "warning"),  # negative grade
        ("intervals", 7, "D", "warning"),  # below detection
        ("intervals", 8, "Q", "error"),  # unknown hole
    ])
    assert got == expected, tables.findings.to_string()
    assert tables.error_count == 13  # counted with repeats: overlap and text are two on line 3


def test_computing_refuses_errors_unless_bad_rows_are_skipped(write_tables):
    tables = read(write_tables(MANY_COLLARS, MANY_SURVEYS, MANY_INTERVALS))
    with pytest.raises(ValidationError, match="--skip-bad-rows"):
        tables.usable()
    clean, rejected = tables.usable(skip_bad_rows=True)
    for name in ("collars", "surveys", "intervals"):
        used = len(getattr(clean, name))
        dropped = int((rejected["table"] == name).sum())
        assert used + dropped == len(getattr(tables, name)), name
    assert sorted(clean.collars["hole"]) == ["B", "D"]
    assert sorted(rejected.loc[rejected.table == "intervals", "line"]) == [3, 4, 5, 8]
    # survey rows of the dropped collar lines go too, with a reason each
    assert rejected["reason"].map(bool).all()
    assert clean.error_count == tables.error_count  # the findings stay as found


# ---- holes that would be placed by a guess

def test_a_hole_whose_every_survey_row_is_in_error_is_left_out_when_its_collar_has_no_angles(write_tables):
    # common practice: a hole with no usable survey and no collar orientation has an unknown path; it
    # must not be drilled vertical by default
    surveys = GOOD_SURVEYS.replace("A,0,90,-60", "A,0,east,-60").replace("A,25,92,-59", "A,25,92,down")
    tables = read(write_tables(surveys=surveys))
    line, hole, column, problem = only_finding(tables, "collars", "error")
    assert (line, hole, column) == (2, "A", "hole") and "path is unknown" in problem and "lines 2, 3" in problem
    clean, rejected = tables.usable(skip_bad_rows=True)
    assert list(clean.collars["hole"]) == ["B"] and set(clean.intervals["hole"]) == {"B"}
    lost = rejected[(rejected.table == "intervals")]
    assert len(lost) == 3 and lost["reason"].str.contains("path is unknown").all()
    assert len(rejected) + len(clean.collars) + len(clean.surveys) + len(clean.intervals) == 2 + 3 + 4


def test_a_hole_whose_every_survey_row_is_in_error_follows_its_collar_angles(write_tables):
    collars = "hole,x,y,z,depth,azimuth,dip\nA,100,200,50,30,90,-60\nB,110,200,50,20,0,-90\n"
    surveys = GOOD_SURVEYS.replace("A,0,90,-60", "A,0,east,-60").replace("A,25,92,-59", "A,25,92,down")
    tables = read(write_tables(collars=collars, surveys=surveys))
    line, hole, column, problem = only_finding(tables, "collars", "warning")
    assert (line, hole) == (2, "A") and "follows its collar azimuth and dip" in problem
    clean, rejected = tables.usable(skip_bad_rows=True)
    assert set(rejected["table"]) == {"surveys"} and list(clean.collars["hole"]) == ["A", "B"]
    trace = Desurvey().fit(clean.collars, clean.surveys)
    # analytic: 20 m down a straight hole at azimuth 90, dip -60 from (100, 200, 50)
    assert np.allclose(trace.positions(["A"], [20.0])[0], [100 + 10.0, 200, 50 - 20 * np.sqrt(3) / 2], atol=1e-9)


def test_holes_that_rise_are_warned_about_and_most_rising_names_the_dip_convention(write_tables):
    # dips written positive downward read with the default convention: every hole would rise
    surveys = "hole,depth,azimuth,dip\nA,0,90,60\nA,25,92,59\nB,0,0,90\n"
    tables = read(write_tables(surveys=surveys))
    rising = findings_of(tables, "surveys", "warning")
    assert set(rising["hole"]) == {"A", "B", ""} and rising["problem"].str.contains("upward").all()
    assert len(tables.notices) == 1 and "--dip-convention positive-down" in tables.notices[0]
    assert "2 of 2 holes" in tables.notices[0]
    right = read(write_tables(surveys=surveys), dip_convention="positive-down")
    assert right.notices == [] and len(findings_of(right, severity="warning")) == 0
    one = read(write_tables(surveys="hole,depth,azimuth,dip\nA,0,90,-60\nA,25,92,-59\nB,0,0,45\n"))
    assert one.notices == [] and findings_of(one, "surveys", "warning")["hole"].tolist() == ["B"]
