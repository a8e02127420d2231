"""Reading tables: delimiters, encodings, line numbers, column matching, cell parsing."""

import numpy as np
import pandas as pd
import pytest

from engine.errors import TableError, UsageError
from engine.tables import (BELOW, MISSING, OK, TEXT, match_columns, parse_column_options, parse_numbers,
                           read_raw_table, read_tables)

from .conftest import GOOD_COLLARS, GOOD_INTERVALS, GOOD_SURVEYS, findings_of


def read(paths, **options):
    return read_tables(paths["collars"], paths["surveys"], paths["intervals"], **options)


def test_good_tables_have_no_findings(write_tables):
    tables = read(write_tables())
    assert tables.error_count == 0 and tables.warning_count == 0, tables.findings.to_string()
    assert tables.value_columns == ["au"] and tables.category_columns == ["lith"]
    assert tables.intervals["_line"].tolist() == [2, 3, 4, 5]


@pytest.mark.parametrize("delimiter", [",", ";", "\t", "|"])
def test_delimiter_is_sniffed(write_tables, delimiter):
    convert = lambda text: text.replace(",", delimiter)
    tables = read(write_tables(convert(GOOD_COLLARS), convert(GOOD_SURVEYS), convert(GOOD_INTERVALS)))
    assert tables.error_count == 0
    assert tables.intervals["au"].tolist() == [0.5, 1.25, 0.75, 2.0]


def test_bom_and_crlf_are_tolerated(write_tables):
    crlf = lambda text: ("\ufeff" + text).replace("\n", "\r\n").encode("utf-8")
    tables = read(write_tables(crlf(GOOD_COLLARS), crlf(GOOD_SURVEYS), crlf(GOOD_INTERVALS)))
    assert tables.error_count == 0
    assert list(tables.collars["hole"]) == ["A", "B"]
    assert tables.columns["collars"]["hole"] == "hole"


def test_line_numbers_count_blank_lines_and_quoted_line_breaks(write_tables):
    intervals = ('hole,from,to,au,note\nA,0,1,0.5,ok\n\nA,1,2,x,"two\nlines"\nA,2,3,0.1,ok\n'
                 'A,3,4,0.1,ok\nA,4,5,0.1,ok\nA,5,6,0.1,ok\nB,0,1,0.1,ok\n')
    tables = read(write_tables(intervals=intervals))
    text = findings_of(tables, "intervals", "error", "au")
    assert text["line"].tolist() == [4]  # header 1, first row 2, blank 3, the faulty row starts at 4
    assert tables.intervals["_line"].tolist() == [2, 4, 6, 7, 8, 9, 10]


def test_windows_1252_file_is_read_with_a_warning(write_tables):
    intervals = "hole,from,to,au,lith\nA,0,1,0.5,GRÈS\n".encode("cp1252")
    tables = read(write_tables(intervals=intervals))
    assert tables.intervals["lith"].tolist() == ["GRÈS"]
    assert any("Windows-1252" in p for p in tables.findings["problem"])


def test_parquet_tables(write_tables, tmp_path):
    paths = write_tables()
    for name, path in list(paths.items()):
        frame = pd.read_csv(path)
        target = tmp_path / f"{name}.parquet"
        frame.to_parquet(target)
        paths[name] = target
    tables = read(paths)
    assert tables.error_count == 0
    assert tables.intervals["_line"].tolist() == [1, 2, 3, 4]  # Parquet: record numbers from 1
    assert tables.intervals["au"].tolist() == [0.5, 1.25, 0.75, 2.0]


def test_synonyms_are_matched_ignoring_case_and_separators(write_tables):
    collars = "Hole_ID,EASTING,North ing,R.L.,Max-Depth\nA,1,2,3,30\n"
    surveys = "DrillHole,MD,Azi,DIP\nA,0,10,-60\n"
    intervals = "hole name,Depth From,Depth_To,cu\nA,0,1,0.2\n"
    tables = read(write_tables(collars, surveys, intervals))
    assert tables.error_count == 0, tables.findings.to_string()
    assert tables.columns["collars"] == {"hole": "Hole_ID", "x": "EASTING", "y": "North ing",
                                         "z": "R.L.", "depth": "Max-Depth"}
    assert tables.columns["surveys"]["survey_depth"] == "MD"
    assert tables.columns["intervals"]["from"] == "Depth From"


def test_explicit_column_option(write_tables):
    collars = "SITE,E_LOCAL,N_LOCAL,Z_LOCAL,DEPTH_END\nA,1,2,3,30\n"
    surveys = "SITE,DOWN,HEADING,DIP\nA,0,10,-60\n"
    intervals = "SITE,FROM,TO,au\nA,0,1,0.2\n"
    explicit = parse_column_options(["hole=SITE", "x=E_LOCAL", "y=N_LOCAL", "z=Z_LOCAL", "depth=DEPTH_END",
                                     "survey_depth=DOWN", "azimuth=HEADING"])
    tables = read(write_tables(collars, surveys, intervals), columns=explicit)
    assert tables.error_count == 0
    assert tables.collars["x"].tolist() == [1.0]
    assert tables.columns["surveys"] == {"hole": "SITE", "survey_depth": "DOWN", "azimuth": "HEADING", "dip": "DIP"}


def test_the_old_survey_depth_role_name_still_works_with_a_note(write_tables):
    notes = []
    explicit = parse_column_options(["at=DOWN"], notes)
    assert explicit == {"survey_depth": "DOWN"} and "survey_depth" in notes[0]
    tables = read(write_tables(surveys="hole,DOWN,azimuth,dip\nA,0,90,-60\nB,0,0,-90\n"), columns=explicit)
    assert tables.error_count == 0 and tables.columns["surveys"]["survey_depth"] == "DOWN"


def test_explicit_column_that_no_table_holds_is_an_error(write_tables):
    with pytest.raises(TableError, match="SITE"):
        read(write_tables(), columns={"hole": "SITE"})
    with pytest.raises(UsageError):
        parse_column_options(["colour=red"])
    with pytest.raises(UsageError):
        parse_column_options(["hole"])


def test_inclination_is_never_taken_as_dip(write_tables):
    surveys = "hole,depth,azimuth,inclination\nA,0,90,30\n"
    with pytest.raises(TableError, match="inclination.*never taken as dip"):
        read(write_tables(surveys=surveys))
    with pytest.raises(TableError, match="inclination"):
        read(write_tables(surveys=surveys), columns={"dip": "inclination"})


def test_ambiguous_and_missing_columns_list_the_columns_found(write_tables):
    with pytest.raises(TableError) as info:
        read(write_tables(collars="hole,x,east,y,z,depth\nA,1,1,2,3,30\n"))
    assert "more than one column could be the x column" in str(info.value)
    assert "Columns found: 'hole', 'x', 'east'" in str(info.value)
    with pytest.raises(TableError) as info:
        read(write_tables(intervals="hole,start,end,au\nA,0,1,0.2\n"))
    assert "no from column" in str(info.value) and "no to column" in str(info.value)
    assert "'start', 'end'" in str(info.value)


def test_missing_markers_become_missing():
    values, status = parse_numbers(pd.Series(["1.5", "", "NaN", "-", "n/a", " N/A ", "null", "2"]))
    assert np.isnan(values[1:7]).all() and (status[1:7] == MISSING).all()
    assert values[0] == 1.5 and values[7] == 2.0
    values, status = parse_numbers(pd.Series(["NS", "3"]), missing_markers={"ns"})
    assert status.tolist() == [MISSING, OK]


def test_below_detection_rules():
    cells = pd.Series(["<0.01", "< 0.5", "0.2", "abc", ">10"])
    values, status = parse_numbers(cells, detection=True)
    assert values[:3].tolist() == [0.005, 0.25, 0.2] and values[4] == 10.0
    assert status.tolist() == [BELOW, BELOW, OK, TEXT, 4]
    for rule, expected in (("limit", 0.01), ("zero", 0.0)):
        assert parse_numbers(cells, detection=True, below_detection=rule)[0][0] == expected
    assert np.isnan(parse_numbers(cells, detection=True, below_detection="missing")[0][0])
    # without detection handling a '<' string is text
    assert parse_numbers(cells)[1][0] == TEXT


def test_below_detection_is_a_warning_per_cell(write_tables):
    intervals = "hole,from,to,au\nA,0,1,<0.01\nA,1,2,0.3\nA,2,3,<0.02\n"
    tables = read(write_tables(intervals=intervals), below_detection="half")
    w = findings_of(tables, "intervals", "warning", "au")
    assert w["line"].tolist() == [2, 4] and w["hole"].tolist() == ["A", "A"]
    assert tables.intervals["au"].tolist() == [0.005, 0.3, 0.01]


def test_decimal_comma_with_semicolon_delimiter(write_tables):
    intervals = "hole;from;to;au\nA;0;1,5;0,25\n"
    tables = read(write_tables(intervals=intervals))
    assert tables.intervals["au"].tolist() == [0.25]


def test_category_columns_and_forced_categories(write_tables):
    intervals = "hole,from,to,au,code,lith\nA,0,1,0.1,1,SCHIST\nA,1,2,0.2,2,VEIN\n"
    tables = read(write_tables(intervals=intervals))
    assert tables.value_columns == ["au", "code"] and tables.category_columns == ["lith"]
    tables = read(write_tables(intervals=intervals), category_columns=["code"])
    assert tables.value_columns == ["au"] and tables.category_columns == ["code", "lith"]
    assert tables.intervals["code"].tolist() == ["1", "2"]


def test_missing_code_makes_numbers_missing(write_tables):
    intervals = "hole,from,to,au\nA,0,1,-99\nA,1,2,0.2\nB,0,1,0.1\n"
    tables = read(write_tables(intervals=intervals), missing_codes=[-99])
    assert np.isnan(tables.intervals["au"][0]) and tables.warning_count == 0
    tables = read(write_tables(intervals=intervals))
    assert findings_of(tables, "intervals", "warning")["line"].tolist() == [2]


def test_match_columns_direct(tmp_path):
    path = tmp_path / "s.csv"
    path.write_text("Hole,At,Azimuth,Dip\nA,0,0,-90\n")
    raw = read_raw_table(path, "surveys")
    assert match_columns(raw) == {"hole": "Hole", "survey_depth": "At", "azimuth": "Azimuth", "dip": "Dip"}
