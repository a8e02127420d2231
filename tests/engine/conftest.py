import textwrap

import pytest

GOOD_COLLARS = """\
hole,x,y,z,depth
A,100,200,50,30
B,110,200,50,20
"""
GOOD_SURVEYS = """\
hole,depth,azimuth,dip
A,0,90,-60
A,25,92,-59
B,0,0,-90
"""
GOOD_INTERVALS = """\
hole,from,to,au,lith
A,0,1,0.5,SCHIST
A,1,2.5,1.25,SCHIST
A,3,5,0.75,VEIN
B,0,2,2.0,SCHIST
"""


@pytest.fixture
def write_tables(tmp_path):
    """Write three CSV tables (text, dedented) and return their paths as a dict."""

    def write(collars=GOOD_COLLARS, surveys=GOOD_SURVEYS, intervals=GOOD_INTERVALS, suffix=".csv"):
        paths = {}
        for name, text in (("collars", collars), ("surveys", surveys), ("intervals", intervals)):
            path = tmp_path / f"{name}{suffix}"
            if isinstance(text, bytes):
                path.write_bytes(text)
            else:
                path.write_text(textwrap.dedent(text), encoding="utf-8", newline="")
            paths[name] = path
        return paths

    return write


def findings_of(tables, table=None, severity=None, column=None):
    f = tables.findings
    if table:
        f = f[f["table"] == table]
    if severity:
        f = f[f["severity"] == severity]
    if column:
        f = f[f["column"] == column]
    return f


def only_finding(tables, table, severity):
    """The one finding of ``table`` with ``severity``, as (line, hole, column, problem)."""
    f = findings_of(tables, table, severity)
    assert len(f) == 1, tables.findings.to_string()
    row = f.iloc[0]
    return int(row["line"]), row["hole"], row["column"], row["problem"]
