"""Reading collar, survey and interval tables, matching their columns, and validating them.

The three tables are read from CSV (delimiter sniffed, BOM and CRLF tolerated) or Parquet. Every row
keeps the line number an editor shows for it (header = line 1; for Parquet, the first record is line
1). Column names are matched against the synonyms of docs/conventions.md, or named with
``--column ROLE=NAME``. Every problem found is collected as a finding
``(table, line, hole, column, severity, problem)``; nothing stops at the first fault.

Example
-------
>>> from synthetic_holes import ProgramSpec, generate_program
>>> import tempfile, pathlib
>>> folder = pathlib.Path(tempfile.mkdtemp())
>>> paths = generate_program(ProgramSpec(n_along=3, n_lines=2, hole_length_m=60), seed=1).write(folder)
>>> tables = read_tables(paths["collars"], paths["surveys"], paths["intervals"])
>>> len(tables.collars), tables.error_count
(6, 0)
"""

from __future__ import annotations

import csv
import io
import re
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd

from ._jit import segmented_running_max
from .errors import TableError, UsageError, ValidationError, list_some, shorten

TABLE_NAMES = ("collars", "surveys", "intervals")

#: Synonyms of each role, already in normalised form (see :func:`normalise_name`).
ROLE_SYNONYMS: dict[str, tuple[str, ...]] = {
    "hole": ("hole", "holeid", "holename", "drillhole"),
    "x": ("x", "east", "easting"),
    "y": ("y", "north", "northing"),
    "z": ("z", "rl", "elev", "elevation"),
    "depth": ("depth", "eoh", "totaldepth", "maxdepth", "length"),
    "survey_depth": ("depth", "surveydepth", "at", "md", "distance"),
    "azimuth": ("azimuth", "azi", "az", "bearing"),
    "dip": ("dip",),
    "from": ("from", "depthfrom", "fromm"),
    "to": ("to", "depthto", "tom"),
}
ROLES = tuple(ROLE_SYNONYMS)

#: Role names of earlier releases, still accepted in ``--column ROLE=NAME`` with a note.
RENAMED_ROLES = {"at": "survey_depth"}

#: Roles each table needs (required) and may have (optional).
TABLE_ROLES: dict[str, tuple[tuple[str, ...], tuple[str, ...]]] = {
    "collars": (("hole", "x", "y", "z", "depth"), ("azimuth", "dip")),
    "surveys": (("hole", "survey_depth", "azimuth", "dip"), ()),
    "intervals": (("hole", "from", "to"), ()),
}

#: Names that mean an angle from vertical: never taken as dip.
INCLINATION_NAMES = ("inclination", "incl", "inc")

#: Cell texts that mean "no value" (compared in lower case, after stripping spaces).
MISSING_MARKERS = frozenset({"", "nan", "na", "n/a", "-", "--", "null", "none", "#n/a"})

BELOW_DETECTION_RULES = ("half", "limit", "zero", "missing")

# Coordinates, depths and values beyond these magnitudes are taken as entry errors, not data
# (common practice: projected coordinates are below 1e7 m; the deepest holes are about 12 km).
COORDINATE_LIMIT_M = 1e8
DEPTH_LIMIT_M = 1e5
VALUE_LIMIT = 1e100  # squares of larger values overflow in variogram sums
# Grades, densities and recoveries of any common unit stay far below this (a pure metal is 1e6 ppm,
# 1e9 ppb); larger numbers are codes, sample numbers or unit mistakes, and drown the round-off of the
# metal reconciliation. One warning per column names them (common practice).
PLAUSIBLE_VALUE_LIMIT = 1e9
DEPTH_TOLERANCE_M = 1e-6

# Survey pairs with a dogleg of at least DOGLEG_MIN_DEG and a severity above
# DOGLEG_SEVERITY_DEG_PER_30M are warned about (common practice: such bends usually come from a
# mistyped angle or magnetic interference, rarely from the hole itself).
DOGLEG_MIN_DEG = 5.0
DOGLEG_SEVERITY_DEG_PER_30M = 10.0
SHORT_SURVEY_STEP_M = 1.0  # below it a bend is reported with the step, not as a rate per 30 m

_NUMBER = r"[-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?"
_BELOW_RE = re.compile(rf"^<\s*({_NUMBER})$")
_ABOVE_RE = re.compile(rf"^>\s*({_NUMBER})$")
_DECIMAL_COMMA_RE = r"[-+]?\d*,\d+"

# Status of each parsed cell.
OK, MISSING, TEXT, BELOW, ABOVE, NOT_FINITE = 0, 1, 2, 3, 4, 5


def normalise_name(name: str) -> str:
    """Lower case, with spaces, dots, dashes and underscores removed."""
    return re.sub(r"[\s._\-]", "", str(name)).lower()


def find_column(columns, name) -> str | None:
    """The column called ``name``: the exact name, else the one column whose name matches it ignoring
    case, spaces, dots, dashes and underscores (see :func:`normalise_name`); None when none or several
    do."""
    columns = [str(c) for c in columns]
    if name in columns:
        return name
    matches = [c for c in columns if normalise_name(c) == normalise_name(name)]
    return matches[0] if len(matches) == 1 else None


# --------------------------------------------------------------------------------------------
# findings
# --------------------------------------------------------------------------------------------

FINDING_COLUMNS = ["table", "line", "hole", "column", "severity", "problem"]


class Findings:
    """A growing list of findings; rows are ``(table, line, hole, column, severity, problem)``."""

    def __init__(self):
        self._rows: list[tuple] = []

    def add(self, table, line, hole, column, severity, problem):
        self._rows.append((table, line, hole, column, severity, problem))

    def add_rows(self, table, lines, holes, column, severity, problems):
        """Add one finding per row; ``problems`` is a sequence of sentences or one sentence."""
        if isinstance(problems, str):
            problems = [problems] * len(lines)
        for line, hole, problem in zip(lines, holes, problems):
            self._rows.append((table, int(line), hole, column, severity, problem))

    def rows(self) -> list[tuple]:
        """The findings so far, as ``(table, line, hole, column, severity, problem)`` tuples."""
        return list(self._rows)

    def extend(self, other: "Findings"):
        self._rows.extend(other._rows)

    def __len__(self):
        return len(self._rows)

    def frame(self) -> pd.DataFrame:
        frame = pd.DataFrame(self._rows, columns=FINDING_COLUMNS)
        frame["line"] = frame["line"].astype("Int64")
        order = {name: i for i, name in enumerate(TABLE_NAMES)}
        frame["_t"] = frame["table"].map(order).fillna(len(order))
        frame = frame.sort_values(["_t", "line"], kind="stable").drop(columns="_t")
        return frame.reset_index(drop=True)


# --------------------------------------------------------------------------------------------
# reading one file
# --------------------------------------------------------------------------------------------


@dataclass
class RawTable:
    """A table as read: every cell as found (text for CSV), plus each row's line number."""

    name: str
    path: str
    frame: pd.DataFrame
    lines: np.ndarray
    delimiter: str | None = None
    notes: list[tuple] = field(default_factory=list)  # (line or None, severity, problem)


def _sniff_delimiter(text: str, path: str) -> str:
    sample_lines = [line for line in text[:65536].splitlines()[:50] if line.strip()]
    sample = "\n".join(sample_lines)
    try:
        return csv.Sniffer().sniff(sample, delimiters=",;\t|").delimiter
    except csv.Error:
        header = sample_lines[0] if sample_lines else ""
        counts = {d: header.count(d) for d in ",;\t|"}
        best = max(counts, key=counts.get)
        if counts[best] == 0:
            raise TableError(
                f"{path}: cannot tell how the columns are separated: the header line "
                f"{header[:80]!r} holds no comma, semicolon, tab or '|'. Save the table as CSV with "
                "one of those delimiters."
            ) from None
        return best


def _decode(data: bytes, path: str) -> tuple[str, list[str]]:
    if not data.strip():
        raise TableError(f"{path}: the file is empty. Export the table again with a header line.")
    head = data[:65536]
    if b"\x00" in head:
        raise TableError(
            f"{path}: this is not a text table (it holds NUL bytes: a binary file, or UTF-16 "
            "text). Save it as CSV in UTF-8, or give a Parquet file ending in .parquet."
        )
    nul = data.find(b"\x00", len(head))
    if nul >= 0:  # a damaged file: a NUL byte deep inside would become part of a cell's text
        line = data.count(b"\n", 0, nul) + 1
        raise TableError(
            f"{path}, line {line}: the line holds a NUL byte, which no text table has: the file is damaged "
            "(a failed copy or export). Export the table again."
        )
    notes = []
    try:
        text = data.decode("utf-8-sig")
    except UnicodeDecodeError:
        text = data.decode("cp1252", errors="replace")
        notes.append((None, "warning", "the file is not UTF-8; it was read as Windows-1252 text"))
    return text, notes


def _record_lines(data: bytes, text: str, delimiter: str, n_rows: int) -> np.ndarray:
    """Line number (header = 1) at which each data record starts; blank lines are skipped as
    pandas skips them (empty or white space only)."""
    raw = np.frombuffer(data, dtype=np.uint8)
    newline = 10 if (raw == 10).any() else 13
    ends = np.flatnonzero(raw == newline)
    starts = np.r_[0, ends + 1]
    ends = np.r_[ends, len(raw)]
    keep = starts < len(raw)
    starts, ends = starts[keep], ends[keep]
    filled = ends > starts
    # a line that starts with white space may be blank: look at those few one by one
    space = np.zeros(256, dtype=bool)
    space[[9, 10, 13, 32]] = True
    maybe = np.flatnonzero(filled & space[raw[np.minimum(starts, len(raw) - 1)]])
    for k in maybe:
        filled[k] = bool(data[starts[k]:ends[k]].strip())
    physical = np.flatnonzero(filled) + 1  # 1-based numbers of non-blank lines
    if len(physical) == n_rows + 1:
        return physical[1:].astype(np.int64)
    # Quoted fields hold line breaks: let the csv module count physical lines.
    reader = csv.reader(io.StringIO(text, newline=""), delimiter=delimiter)
    found = []
    previous_end = 0
    for record in reader:
        if record and "".join(record).strip() != "" or len(record) > 1:
            found.append(previous_end + 1)
        previous_end = reader.line_num
    found = np.asarray(found[1:], dtype=np.int64)  # drop the header record
    if len(found) != n_rows:  # pandas and csv disagree: fall back to counting records
        return np.arange(2, n_rows + 2, dtype=np.int64)
    return found


#: Every spelling of the missing markers that the CSV parser treats as missing in numeric columns
#: (case variants); other spellings and markers given by the user are caught cell by cell.
_PARSER_MISSING = sorted({v for m in MISSING_MARKERS for v in (m, m.upper(), m.capitalize())})


def read_raw_table(path, name: str, text_columns=frozenset()) -> RawTable:
    """Read one table file as found; raise :class:`TableError` with a clear message when it cannot.

    Columns whose normalised name is in ``text_columns`` are kept as text exactly as written (hole
    ids such as ``007``); the others are parsed as numbers where every cell is one, and kept as text
    otherwise (to be parsed cell by cell).
    """
    path = str(path)
    p = Path(path)
    if not p.exists():
        raise UsageError(f"{name} file {path!r} does not exist. Check the path given to --{name}.")
    if p.is_dir():
        raise UsageError(f"{name} path {path!r} is a folder; give the table file.")
    if p.suffix.lower() in (".parquet", ".pq"):
        return _read_parquet(p, name)
    try:
        data = p.read_bytes()
    except OSError as exc:
        raise UsageError(f"{name} file {path!r} cannot be read: {exc.strerror}.") from None
    text, notes = _decode(data, path)
    delimiter = _sniff_delimiter(text, path)
    header = next(csv.reader(io.StringIO(text, newline=""), delimiter=delimiter), [])
    names = [h.strip() for h in header]
    seen: dict[str, int] = {}
    for i, h in enumerate(names, start=1):
        if h and h in seen:
            raise TableError(
                f"{path}, line 1: column {h!r} appears twice (columns {seen[h]} and {i}). "
                "Rename one of them."
            )
        seen.setdefault(h, i)
    as_text = {h: object for h in header if normalise_name(h) in text_columns}
    try:
        frame = pd.read_csv(
            io.StringIO(text),
            sep=delimiter,
            dtype=as_text,
            keep_default_na=False,
            na_values={h: _PARSER_MISSING for h in header if h not in as_text},
            skip_blank_lines=True,
            engine="c",
            low_memory=False,
        )
    except pd.errors.ParserError as exc:
        message = str(exc)
        found = re.search(r"Expected (\d+) fields in line (\d+), saw (\d+)", message)
        if "EOF inside string" in message:
            line = _unclosed_quote_line(text, delimiter)
            raise TableError(
                f"{path}, line {line}: a quote opened on this line is never closed, so the rest of the file "
                "would be one cell. Close the quote (or remove it) on that line."
            ) from None
        if found:
            expected, line, saw = found.groups()
            raise TableError(
                f"{path}, line {line}: the row has {saw} fields but the header has {expected}. "
                "Check the delimiter and the quoting on that line."
            ) from None
        raise TableError(f"{path}: cannot be read as a table ({message.strip()}).") from None
    except (pd.errors.EmptyDataError, UnicodeError, ValueError) as exc:
        raise TableError(f"{path}: cannot be read as a table ({exc}).") from None
    frame.columns = [str(c).strip() for c in frame.columns]
    lines = _record_lines(data, text, delimiter, len(frame))
    # Unnamed columns: drop when empty (a trailing delimiter), else give them a plain name.
    keep = []
    for i, column in enumerate(frame.columns):
        if column == "" or column.startswith("Unnamed:"):
            if _empty_cells(frame[column]).all():
                continue
            frame = frame.rename(columns={column: f"column_{i + 1}"})
            keep.append(f"column_{i + 1}")
        else:
            keep.append(column)
    frame = frame[keep]
    if len(frame.columns):  # rows of delimiters only are blank too
        blank = np.ones(len(frame), dtype=bool)
        numeric = [c for c in frame.columns if pd.api.types.is_numeric_dtype(frame[c].dtype)]
        for column in numeric:
            blank &= frame[column].isna().to_numpy()
        rows = np.flatnonzero(blank)
        for column in frame.columns:
            if column not in numeric and len(rows):
                rows = rows[_empty_cells(frame[column].iloc[rows])]
        blank[:] = False
        blank[rows] = True
        if blank.any():
            frame = frame.loc[~blank].reset_index(drop=True)
            lines = lines[~blank]
    if len(frame) == 0:
        raise TableError(f"{path}: the table has a header but no rows. Export it again with its data.")
    if not text.endswith(("\n", "\r")):
        last = text.rsplit("\n", 1)[-1]
        fields = next(csv.reader([last], delimiter=delimiter), [])
        if len(fields) < len(header):
            notes.append((int(lines[-1]), "error",
                          f"the last row has {len(fields)} of {len(header)} fields and the file does "
                          "not end with a line break: the file looks truncated"))
    return RawTable(name, path, frame, lines, delimiter, notes)


def _unclosed_quote_line(text: str, delimiter: str) -> int:
    """The editor line on which the record holding an unclosed quote starts."""
    reader = csv.reader(io.StringIO(text, newline=""), delimiter=delimiter, strict=True)
    start = 1
    try:
        for _ in reader:
            start = reader.line_num + 1
    except csv.Error:
        pass
    return start


def _empty_cells(series: pd.Series) -> np.ndarray:
    if pd.api.types.is_numeric_dtype(series.dtype):
        return series.isna().to_numpy()
    return (series.isna() | (series.astype(str).str.strip() == "")).to_numpy()


def _read_parquet(p: Path, name: str) -> RawTable:
    try:
        frame = pd.read_parquet(p)
    except Exception as exc:  # pyarrow raises many types for corrupt files
        first = str(exc).strip().splitlines()[0] if str(exc).strip() else ""
        raise TableError(f"{p}: cannot be read as a Parquet table ({type(exc).__name__}: {shorten(first, 200)}).") \
            from None
    frame.columns = [str(c).strip() for c in frame.columns]
    if len(frame) == 0:
        raise TableError(f"{p}: the Parquet table has no rows.")
    frame = frame.reset_index(drop=True)
    return RawTable(name, str(p), frame, np.arange(1, len(frame) + 1, dtype=np.int64))


# --------------------------------------------------------------------------------------------
# column matching
# --------------------------------------------------------------------------------------------


def parse_column_options(items, notes: list | None = None) -> dict[str, str]:
    """Turn ``["hole=HOLE_NAME", "dip=DIP_DEG"]`` into ``{"hole": "HOLE_NAME", "dip": "DIP_DEG"}``. A
    role name of an earlier release (``at``) is taken with a sentence appended to ``notes``."""
    explicit: dict[str, str] = {}
    for item in items or ():
        if "=" not in item:
            raise UsageError(f"--column {item!r}: write ROLE=NAME, for example --column hole=HOLE_NAME.")
        role, name = (part.strip() for part in item.split("=", 1))
        role = role.lower()
        if role in RENAMED_ROLES:
            if notes is not None:
                notes.append(f"--column {role}=...: the role {role!r} is now called {RENAMED_ROLES[role]!r}; "
                             f"write --column {RENAMED_ROLES[role]}={name} ({role!r} will stop working in a "
                             "later release)")
            role = RENAMED_ROLES[role]
        if role not in ROLES:
            raise UsageError(f"--column {item!r}: unknown role {role!r}; roles are {', '.join(ROLES)}.")
        if not name:
            raise UsageError(f"--column {item!r}: the column name is empty.")
        explicit[role] = name
    return explicit


def match_columns(raw: RawTable, explicit: dict[str, str] | None = None) -> dict[str, str]:
    """Map each role of the table to one of its columns, or raise a clear :class:`TableError`."""
    explicit = explicit or {}
    required, optional = TABLE_ROLES[raw.name]
    by_norm: dict[str, list[str]] = {}
    for column in raw.frame.columns:
        by_norm.setdefault(normalise_name(column), []).append(column)
    found = ", ".join(repr(c[:40]) for c in raw.frame.columns)
    mapping: dict[str, str] = {}
    problems = []
    # roles named with --column first, so that a column they name is not taken by another role's synonym
    for role in sorted(required + optional, key=lambda r: r not in explicit):
        if role in explicit and normalise_name(explicit[role]) in by_norm:
            name = explicit[role]
            if role == "dip" and normalise_name(name) in INCLINATION_NAMES:
                problems.append(
                    f"column {name!r} is an inclination (measured from vertical), not a dip "
                    "(measured from horizontal, negative down); add a dip column "
                    "(dip = inclination - 90 for holes drilled downward)"
                )
                continue
            candidates = by_norm[normalise_name(name)]
        else:
            candidates = [c for syn in ROLE_SYNONYMS[role] for c in by_norm.get(syn, [])]
        candidates = [c for c in dict.fromkeys(candidates) if c not in mapping.values()]
        if len(candidates) == 1:
            mapping[role] = candidates[0]
        elif len(candidates) > 1:
            problems.append(
                f"more than one column could be the {role} column ({list_some(candidates)}); "
                f"name one with --column {role}=NAME"
            )
        elif role in required:
            hint = f"name it with --column {role}=NAME"
            if role == "dip" and any(normalise_name(c) in INCLINATION_NAMES for c in raw.frame.columns):
                hint = (
                    "the table has an inclination column, which is measured from vertical and is "
                    "never taken as dip; add a dip column (dip = inclination - 90 for holes drilled "
                    "downward)"
                )
            problems.append(f"no {role} column ({hint})")
    if problems:
        raise TableError(
            f"{raw.path} ({raw.name}): " + "; ".join(problems) + f". Columns found: {found}."
        )
    return mapping


# --------------------------------------------------------------------------------------------
# parsing cells
# --------------------------------------------------------------------------------------------


def _as_text(series: pd.Series) -> pd.Series:
    text = series.astype(object).where(series.notna(), "")
    return text.astype(str).str.strip()


def parse_numbers(
    series: pd.Series,
    *,
    detection: bool = False,
    below_detection: str = "half",
    missing_markers=MISSING_MARKERS,
    decimal_comma: bool = False,
) -> tuple[np.ndarray, np.ndarray]:
    """Parse a column of cells into float64 values and a status code per cell.

    Status codes: OK, MISSING (empty or a missing marker), TEXT (not a number), BELOW and ABOVE
    (detection-limit strings such as ``<0.01`` and ``>10``, only when ``detection``), NOT_FINITE.
    Below-detection cells take half the limit (``below_detection="half"``), the limit, zero or
    missing; above-limit cells take the limit.
    """
    n = len(series)
    if pd.api.types.is_numeric_dtype(series.dtype) and not pd.api.types.is_bool_dtype(series.dtype):
        values = np.array(series.to_numpy(dtype=np.float64, na_value=np.nan))
        status = np.where(np.isnan(values), MISSING, OK).astype(np.int8)
        status[np.isinf(values)] = NOT_FINITE
        return values, status
    text = _as_text(series)
    lower = text.str.lower()
    status = np.full(n, OK, dtype=np.int8)
    missing = lower.isin(missing_markers).to_numpy()
    status[missing] = MISSING
    if decimal_comma:  # "0,25", and detection limits such as "<0,01"
        comma = text.str.fullmatch(r"[<>]?\s*" + _DECIMAL_COMMA_RE).to_numpy(dtype=bool)
        if comma.any():
            text = text.where(~comma, text.str.replace(",", ".", regex=False))
    values = np.array(pd.to_numeric(text.where(~missing, ""), errors="coerce"), dtype=np.float64)
    unparsed = np.isnan(values) & ~missing
    # pandas reads "nan"/"inf" spellings; keep infinities as NOT_FINITE
    status[np.isinf(values)] = NOT_FINITE
    if unparsed.any():
        idx = np.flatnonzero(unparsed)
        cells = text.iloc[idx]
        if detection:
            limit_b = np.full(len(idx), np.nan)
            limit_a = np.full(len(idx), np.nan)
            first = cells.str[:1].to_numpy(dtype=object)
            for limit, mark, pattern in ((limit_b, "<", _BELOW_RE), (limit_a, ">", _ABOVE_RE)):
                marked = first == mark
                if marked.any():
                    found = cells[marked].str.extract(pattern, expand=False)
                    limit[marked] = pd.to_numeric(found, errors="coerce").to_numpy(dtype=np.float64)
            is_b = ~np.isnan(limit_b)
            is_a = ~np.isnan(limit_a)
            factor = {"half": 0.5, "limit": 1.0, "zero": 0.0, "missing": np.nan}[below_detection]
            values[idx[is_b]] = limit_b[is_b] * factor
            status[idx[is_b]] = BELOW
            values[idx[is_a]] = limit_a[is_a]
            status[idx[is_a]] = ABOVE
            rest = idx[~is_b & ~is_a]
        else:
            rest = idx
        status[rest] = TEXT
    return values, status


# --------------------------------------------------------------------------------------------
# the tables
# --------------------------------------------------------------------------------------------


@dataclass
class DrillTables:
    """The three tables, typed, with every finding of reading and validation.

    Role columns are renamed to ``hole, x, y, z, depth, azimuth, dip`` (collars), ``hole, at,
    azimuth, dip`` (surveys) and ``hole, from, to`` (intervals); interval value and category
    columns keep their names. ``_line`` holds each row's line number in its file.
    """

    collars: pd.DataFrame
    surveys: pd.DataFrame
    intervals: pd.DataFrame
    value_columns: list[str]
    category_columns: list[str]
    sources: dict[str, str]
    columns: dict[str, dict[str, str]]
    findings: pd.DataFrame
    options: dict = field(default_factory=dict)
    notices: list = field(default_factory=list)  # warnings about the whole tables, printed loudly

    @property
    def error_count(self) -> int:
        return int((self.findings["severity"] == "error").sum())

    @property
    def warning_count(self) -> int:
        return int((self.findings["severity"] == "warning").sum())

    def row_counts(self) -> dict[str, int]:
        return {name: len(getattr(self, name)) for name in TABLE_NAMES}

    def usable(self, skip_bad_rows: bool = False) -> tuple["DrillTables", pd.DataFrame]:
        """Tables to compute with, and the rejected rows ``(table, line, hole, reason)``.

        With errors present and ``skip_bad_rows`` false this raises :class:`ValidationError`. With
        ``skip_bad_rows``, every row that holds an error is rejected, with the surveys and intervals
        of a rejected collar and the intervals of holes without a usable collar.
        """
        errors = self.findings[self.findings["severity"] == "error"]
        if len(errors) and not skip_bad_rows:
            first = errors.iloc[0]
            where = f"{self.sources.get(first['table'], first['table'])}"
            if pd.notna(first["line"]):
                where += f", line {int(first['line'])}"
            raise ValidationError(
                f"the tables hold {len(errors)} error(s); the first: {where}, hole "
                f"{shorten(first['hole'])!r}, column {shorten(first['column'])!r}: {first['problem']}. Run "
                "'drillaxis check' for the full list, fix the rows, or pass --skip-bad-rows to leave "
                "them out (they go to rejected.csv).",
                findings=self.findings,
            )
        rejected = []

        def reject(table: str, frame: pd.DataFrame, mask: np.ndarray, reasons) -> pd.DataFrame:
            if mask.any():
                part = frame.loc[mask, ["_line", "hole"]]
                reason = reasons if isinstance(reasons, str) else np.asarray(reasons, dtype=object)[mask]
                rejected.append(
                    pd.DataFrame(
                        {"table": table, "line": part["_line"].to_numpy(), "hole": part["hole"].to_numpy(),
                         "reason": reason}
                    )
                )
            return frame.loc[~mask].reset_index(drop=True)

        def error_reasons(table: str, frame: pd.DataFrame):
            rows = errors[errors["table"] == table]
            text = rows.groupby("line")["problem"].agg("; ".join)
            reasons = frame["_line"].map(text)
            return reasons.notna().to_numpy(), reasons.to_numpy()

        mask, reasons = error_reasons("collars", self.collars)
        collars = reject("collars", self.collars, mask, reasons)
        good_holes = set(collars["hole"])
        lost = self.collars.loc[mask, ["hole", "_line"]].assign(reason=reasons[mask])
        lost_why = {h: f"the collar row of this hole (line {line}) was rejected: {reason}"
                    for h, line, reason in lost.drop_duplicates("hole").itertuples(index=False)}
        tables = {}
        for name in ("surveys", "intervals"):
            frame = getattr(self, name)
            mask, reasons = error_reasons(name, frame)
            frame = reject(name, frame, mask, reasons)
            gone = (~frame["hole"].isin(good_holes)).to_numpy()
            why = np.full(len(frame), "the hole has no usable collar row", dtype=object)
            holes = frame["hole"].to_numpy()
            why[gone] = [lost_why.get(h, why[0]) for h in holes[gone]]
            tables[name] = reject(name, frame, gone, why)
        rejected_frame = (
            pd.concat(rejected, ignore_index=True)
            if rejected
            else pd.DataFrame(columns=["table", "line", "hole", "reason"])
        )
        clean = DrillTables(
            collars, tables["surveys"], tables["intervals"], list(self.value_columns),
            list(self.category_columns), dict(self.sources), dict(self.columns), self.findings,
            dict(self.options), list(self.notices),
        )
        return clean, rejected_frame


def read_tables(
    collars,
    surveys,
    intervals,
    *,
    columns: dict[str, str] | None = None,
    dip_convention: str = "negative-down",
    below_detection: str = "half",
    missing_markers=(),
    missing_codes=(),
    category_columns=(),
) -> DrillTables:
    """Read and validate the three tables; every problem becomes a finding, none raises.

    Parameters
    ----------
    collars, surveys, intervals : path-like
        CSV or Parquet files.
    columns : dict, optional
        Explicit role -> column name (the ``--column`` option).
    dip_convention : {"negative-down", "positive-down"}
        Sign of dip for holes drilled downward; used here for the dogleg check.
    below_detection : {"half", "limit", "zero", "missing"}
        What a value such as ``<0.01`` becomes.
    missing_markers : sequence of str
        Further cell texts that mean "not sampled" (for example ``NS``), besides the built-in ones.
    missing_codes : sequence of float
        Numbers in value columns that mean "not sampled" (for example ``-99``).
    category_columns : sequence of str
        Interval columns to treat as text categories even when they hold numbers.

    Raises
    ------
    TableError
        When a file cannot be read as a table or lacks a required column. Row-level problems never
        raise: they are findings.
    """
    if dip_convention not in ("negative-down", "positive-down"):
        raise UsageError(f"dip convention {dip_convention!r}: use negative-down or positive-down.")
    if below_detection not in BELOW_DETECTION_RULES:
        raise UsageError(
            f"below-detection rule {below_detection!r}: use one of {', '.join(BELOW_DETECTION_RULES)}."
        )
    explicit = dict(columns or {})
    text_columns = set(ROLE_SYNONYMS["hole"])
    if "hole" in explicit:
        text_columns.add(normalise_name(explicit["hole"]))
    forced = {normalise_name(c) for c in category_columns}
    raws = {name: read_raw_table(path, name, frozenset(text_columns | (forced if name == "intervals" else set())))
            for name, path in zip(TABLE_NAMES, (collars, surveys, intervals))}
    for role, name in explicit.items():
        if not any(
            normalise_name(name) in {normalise_name(c) for c in raw.frame.columns}
            and role in sum(TABLE_ROLES[raw.name], ())
            for raw in raws.values()
        ):
            raise TableError(
                f"--column {role}={name}: no table that has a {role} column holds a column named "
                f"{name!r}. Columns found: "
                + "; ".join(f"{raw.name}: {', '.join(map(repr, raw.frame.columns))}" for raw in raws.values())
                + "."
            )
    markers = MISSING_MARKERS | {str(m).strip().lower() for m in missing_markers}
    findings = Findings()
    mappings, problems = {}, []
    for name, raw in raws.items():  # every table's missing columns in one message
        try:
            mappings[name] = match_columns(raw, explicit)
        except TableError as exc:
            problems.append(str(exc))
    if problems:
        raise TableError(" ".join(problems))
    for raw in raws.values():
        for line, severity, problem in raw.notes:
            row = np.flatnonzero(raw.lines == line) if line is not None else []
            hole = str(_as_text(raw.frame[mappings[raw.name]["hole"]].iloc[row[:1]]).iloc[0]) if len(row) else ""
            findings.add(raw.name, line, hole, "", severity, problem)
    frames = {}
    for name, raw in raws.items():
        frames[name] = _typed_role_columns(raw, mappings[name], markers, findings)
    value_columns, category_columns, frames["intervals"] = _interval_data_columns(
        raws["intervals"], mappings["intervals"], frames["intervals"], markers, missing_codes,
        below_detection, set(category_columns), findings,
    )
    notices = _validate(frames, dip_convention, findings, mappings)
    return DrillTables(
        frames["collars"], frames["surveys"], frames["intervals"], value_columns, category_columns,
        {n: r.path for n, r in raws.items()}, mappings, findings.frame(),
        {"dip_convention": dip_convention, "below_detection": below_detection}, notices,
    )


def hole_codes(values, hole_ids) -> np.ndarray:
    """Index of each of ``values`` in ``hole_ids`` (-1 where absent), compared as text."""
    import pyarrow as pa
    import pyarrow.compute as pc

    def text(v):
        if isinstance(v, (pd.Series, pd.Index)):
            if hasattr(v.array, "__arrow_array__"):
                return pc.cast(pa.array(v.array), pa.string())
            v = v.to_numpy()
        v = np.asarray(v)
        if v.dtype != object:
            v = v.astype(str)
        return pc.cast(pa.array(v, type=pa.string(), from_pandas=True), pa.string())

    codes = pc.index_in(text(values), value_set=text(hole_ids))
    return codes.fill_null(-1).to_numpy(zero_copy_only=False).astype(np.int64)


class _View:
    """One typed table with its columns fetched once as numpy arrays. Findings name the user's own
    column of a role (``columns``: role -> column as the file spells it)."""

    def __init__(self, name: str, frame: pd.DataFrame, findings: Findings, columns: dict | None = None):
        self.name = name
        self.frame = frame
        self.findings = findings
        self.columns = dict(columns or {})
        self.lines = frame["_line"].to_numpy()
        self.holes = frame["hole"].to_numpy(dtype=object)
        self.named = self.holes != ""
        self.code = np.full(len(frame), -1, dtype=np.int64)

    def values(self, role):
        return self.frame[role].to_numpy(dtype=np.float64)

    def status(self, role):
        return self.frame[f"_status_{role}"].to_numpy()

    def add(self, mask, column, severity, problems):
        """One finding per row where ``mask``; ``problems`` is a sentence, or a function of the row
        positions returning one sentence per row."""
        if not mask.any():
            return
        rows = np.flatnonzero(mask)
        text = problems if isinstance(problems, str) else problems(rows)
        self.findings.add_rows(self.name, self.lines[rows], self.holes[rows], self.columns.get(column, column),
                               severity, text)

    def missing(self, role, column, what):
        """Flag missing cells of a parsed role column; return the mask of usable (OK) cells."""
        status = self.status(role)
        self.add(status == MISSING, column, "error", what)
        return status == OK


def _typed_role_columns(raw: RawTable, mapping: dict, markers, findings: Findings) -> pd.DataFrame:
    frame = pd.DataFrame({"_line": raw.lines})
    holes = _as_text(raw.frame[mapping["hole"]]).to_numpy(dtype=object)
    frame["hole"] = holes
    decimal_comma = raw.delimiter not in (None, ",")  # "12,5" is a number where commas do not part cells
    for role, column in mapping.items():
        if role == "hole":
            continue
        values, status = parse_numbers(raw.frame[column], missing_markers=markers, decimal_comma=decimal_comma)
        frame[role] = values
        frame[f"_status_{role}"] = status
        bad = status == TEXT
        if bad.any():
            cells = _as_text(raw.frame[column].iloc[np.flatnonzero(bad)])
            findings.add_rows(
                raw.name, raw.lines[bad], holes[bad], column, "error",
                [f"{c[:40]!r} is not a number; {column} needs a number here" for c in cells],
            )
        bad = status == NOT_FINITE
        findings.add_rows(raw.name, raw.lines[bad], holes[bad], column, "error",
                          f"{column} is not a finite number")
    empty = holes == ""
    findings.add_rows(raw.name, raw.lines[empty], holes[empty], mapping["hole"], "error",
                      "the hole id is empty; every row needs the id of its hole")
    return frame


def _clearly_text(series: pd.Series, markers, sample: int = 2000) -> bool:
    """True when fewer than half of a sample of the column's filled cells read as numbers (then the
    column is a category and is not parsed cell by cell)."""
    if pd.api.types.is_numeric_dtype(series.dtype) or len(series) <= sample:
        return False
    cells = _as_text(series.iloc[np.linspace(0, len(series) - 1, sample).astype(np.int64)])
    cells = cells[~cells.str.lower().isin(markers)]
    if len(cells) == 0:
        return False
    cells = cells.str.lstrip("<>").str.replace(",", ".", regex=False).str.strip()
    return pd.to_numeric(cells, errors="coerce").notna().mean() < 0.5


#: Columns that drillaxis writes beside the input's own in samples.csv, composites.csv and
#: rejected.csv: an interval column of the same name would be overwritten there, so it is left out.
OUTPUT_COLUMNS = frozenset({"x", "y", "z", "length", "sampled", "bench", "x_from", "y_from", "z_from", "x_to",
                            "y_to", "z_to", "table", "line", "reason"})


def _output_name(column: str, names) -> bool:
    """Whether an interval column's name is one drillaxis writes itself (also ``V_sampled``,
    ``V_effective_samples`` and ``metal_V`` for another column V of the table)."""
    return (column in OUTPUT_COLUMNS or (column.endswith("_sampled") and column[:-8] in names)
            or (column.endswith("_effective_samples") and column[:-18] in names)
            or (column.startswith("metal_") and column[6:] in names))


def _interval_data_columns(raw, mapping, frame, markers, missing_codes, below_detection,
                           forced_categories, findings):
    role_columns = set(mapping.values())
    holes = frame["hole"].to_numpy(dtype=object)
    lines = raw.lines
    value_columns, category_columns = [], []
    added: dict = {}  # the new columns, joined to the frame once (one insert per column fragments it)
    reserved = {"hole", "from", "to", "_line"}
    forced = {normalise_name(c) for c in forced_categories}
    codes = np.asarray([float(c) for c in missing_codes], dtype=np.float64)
    decimal_comma = raw.delimiter not in (None, ",")
    names = set(raw.frame.columns)
    for column in raw.frame.columns:
        if column in role_columns:
            continue
        if column in reserved or column.startswith("_status_"):
            raise TableError(
                f"{raw.path}: interval column {column!r} has a name drillaxis uses for its own "
                "columns; rename it."
            )
        if _output_name(column, names):
            findings.add("intervals", None, "", column, "warning",
                         f"interval column {column!r} is left out: drillaxis writes a column of that name itself "
                         "(positions, lengths, sampled lengths, metal); rename it in the table to keep it")
            continue
        series = raw.frame[column]
        if normalise_name(column) in forced:
            added[column] = _as_text(series).to_numpy(dtype=object)
            category_columns.append(column)
            continue
        if _clearly_text(series, markers):
            added[column] = _as_text(series).to_numpy(dtype=object)
            category_columns.append(column)
            continue
        values, status = parse_numbers(series, detection=True, below_detection=below_detection,
                                       missing_markers=markers, decimal_comma=decimal_comma)
        present = status != MISSING
        numeric = np.isin(status, (OK, BELOW, ABOVE, NOT_FINITE))
        if present.sum() and numeric.sum() < 0.8 * present.sum():
            added[column] = _as_text(series).to_numpy(dtype=object)
            category_columns.append(column)
            if numeric.sum() >= 0.5 * present.sum():  # mostly numbers: say why it is not a value column
                text = np.flatnonzero(present & ~numeric)
                cells = ", ".join(f"line {lines[r]}: {shorten(c, 20)!r}"
                                  for r, c in zip(text[:3], _as_text(series.iloc[text[:3]])))
                findings.add("intervals", None, "", column, "warning",
                             f"column {column!r} is read as a category, not as values: {int(numeric.sum())} of "
                             f"{int(present.sum())} filled cells are numbers but {len(text)} are not ({cells}"
                             f"{' ...' if len(text) > 3 else ''}); if it holds values, fix those cells or name "
                             "their text with --missing-marker")
            continue
        value_columns.append(column)
        if len(codes):
            coded = np.isin(values, codes) & (status == OK)
            values[coded] = np.nan
            status[coded] = MISSING
        added[column] = values
        if not present.any():
            findings.add("intervals", None, "", column, "warning", f"column {column!r} holds no values")
        for code, severity, sentence in (
            (TEXT, "error", "{cell} is not a number in value column {col}; fix it, or name the "
                            "marker with --missing-marker if it means not sampled"),
            (NOT_FINITE, "error", "{cell} is not a finite number"),
            (BELOW, "warning", "{cell} is below the detection limit; taken as {value:g} "
                               f"(rule: {below_detection})"),
            (ABOVE, "warning", "{cell} is above the upper detection limit; taken as {value:g}"),
        ):
            bad = status == code
            if not bad.any():
                continue
            cells = _as_text(series.iloc[np.flatnonzero(bad)]).to_numpy()
            findings.add_rows(
                "intervals", lines[bad], holes[bad], column, severity,
                [sentence.format(cell=repr(c[:40]), col=repr(column), value=v)
                 for c, v in zip(cells, values[bad])],
            )
        huge = (status == OK) & (np.abs(values) > VALUE_LIMIT)
        findings.add_rows("intervals", lines[huge], holes[huge], column, "error",
                          [f"value {v:g} is too large to compute with (limit {VALUE_LIMIT:g})"
                           for v in values[huge]])
        large = (status == OK) & (np.abs(values) > PLAUSIBLE_VALUE_LIMIT) & ~huge
        if large.any():
            where = ", ".join(str(line) for line in lines[large][:5]) + (" ..." if large.sum() > 5 else "")
            findings.add("intervals", None, "", column, "warning",
                         f"{int(large.sum())} value(s) of {column!r} are larger than {PLAUSIBLE_VALUE_LIMIT:g} "
                         f"(lines {where}; the largest {np.max(np.abs(values[large])):g}): not a plausible grade "
                         "or density in any common unit; check for entry errors, codes for not sampled "
                         "(--missing-code) or a unit mistake")
        negative = (status == OK) & (values < 0)
        findings.add_rows(
            "intervals", lines[negative], holes[negative], column, "warning",
            [f"negative value {v:g}; if it is a code for not sampled or below detection, name it "
             "with --missing-code" for v in values[negative]],
        )
    frame = pd.concat([frame, pd.DataFrame(added, index=frame.index)], axis=1) if added else frame
    return value_columns, category_columns, frame


def _validate(frames, dip_convention, findings: Findings, mappings: dict | None = None) -> list[str]:
    """Add every finding of the typed tables; return the notices that every command prints loudly."""
    mappings = mappings or {}
    collars = _View("collars", frames["collars"], findings, mappings.get("collars"))
    surveys = _View("surveys", frames["surveys"], findings, mappings.get("surveys"))
    intervals = _View("intervals", frames["intervals"], findings, mappings.get("intervals"))

    # ---- collars
    first = pd.Series(collars.holes).duplicated(keep="first").to_numpy()
    ids = collars.holes[collars.named & ~first]  # each named hole once, in file order
    collars.code = hole_codes(collars.holes, ids)
    collars.code[~collars.named] = -1
    dup = collars.named & pd.Series(collars.holes).duplicated(keep=False).to_numpy()
    if dup.any():
        where = pd.Series(collars.lines[dup]).groupby(collars.holes[dup]).agg(lambda s: ", ".join(map(str, s)))
        collars.add(dup, "hole", "error", lambda rows: [
            f"hole id {shorten(h)!r} is used by more than one collar row (lines {where[h]}); hole ids must be unique"
            for h in collars.holes[rows]])
    for role in ("x", "y", "z"):
        ok = collars.missing(role, role, f"the collar has no {role} coordinate")
        values = collars.values(role)
        collars.add(ok & (np.abs(values) > COORDINATE_LIMIT_M), role, "error", lambda rows: [
            f"{role} = {v:g} is not a plausible coordinate in metres" for v in values[rows]])
    ok = collars.missing("depth", "depth", "the collar has no end-of-hole depth")
    depth = collars.values("depth")
    collars.add(ok & (depth <= 0), "depth", "error",
                lambda rows: [f"end-of-hole depth {v:g} must be above zero" for v in depth[rows]])
    collars.add(ok & (depth > DEPTH_LIMIT_M), "depth", "error",
                lambda rows: [f"end-of-hole depth {v:g} m is not plausible" for v in depth[rows]])
    for role in ("azimuth", "dip"):
        if role in collars.frame:
            _angle_ranges(collars, role)
    # end depth of each hole id (first collar row of the id)
    end_depth = np.full(len(ids), np.nan)
    end_depth[collars.code[collars.code >= 0][::-1]] = depth[collars.code >= 0][::-1]

    # ---- surveys
    surveys.code = hole_codes(surveys.holes, ids)
    surveys.add(surveys.named & (surveys.code < 0), "hole", "error",
                lambda rows: [f"hole {shorten(h)!r} has no collar row" for h in surveys.holes[rows]])
    ok_at = surveys.missing("survey_depth", "survey_depth", "the survey row has no depth")
    at = surveys.values("survey_depth")
    surveys.add(ok_at & (at < 0), "survey_depth", "error",
                lambda rows: [f"survey depth {v:g} is negative" for v in at[rows]])
    eoh = np.where(surveys.code >= 0, end_depth[np.maximum(surveys.code, 0)], np.nan)
    surveys.add(ok_at & (at > eoh + DEPTH_TOLERANCE_M), "survey_depth", "warning", lambda rows: [
        f"survey at {a:g} m is past the end of the hole ({e:g} m)" for a, e in zip(at[rows], eoh[rows])])
    ok_az = surveys.missing("azimuth", "azimuth", "the survey row has no azimuth")
    ok_dip = surveys.missing("dip", "dip", "the survey row has no dip")
    ok_az &= _angle_ranges(surveys, "azimuth")
    ok_dip &= _angle_ranges(surveys, "dip")
    usable = ok_at & (at >= 0) & (surveys.code >= 0)
    rows = np.flatnonzero(usable)
    order = rows[np.lexsort((at[rows], surveys.code[rows]))]
    same = (surveys.code[order][1:] == surveys.code[order][:-1]) & (at[order][1:] == at[order][:-1])
    dup = np.zeros(len(at), dtype=bool)
    dup[order[1:][same]] = True
    dup[order[:-1][same]] = True
    if dup.any():
        where: dict = {}
        for r in np.flatnonzero(dup):
            where.setdefault((surveys.code[r], at[r]), []).append(str(surveys.lines[r]))
        surveys.add(dup, "survey_depth", "error", lambda rows: [
            f"more than one survey row at depth {at[r]:g} (lines {', '.join(where[(surveys.code[r], at[r])])}); "
            "keep one" for r in rows])
    good = usable & ok_az & ok_dip & ~dup
    _dogleg_warnings(surveys, order[good[order]], dip_convention)
    n_ids = len(ids)
    surveyed = np.bincount(surveys.code[surveys.code >= 0], minlength=n_ids) > 0
    no_survey = (collars.code >= 0) & ~surveyed[np.maximum(collars.code, 0)]
    has_angles = np.zeros(len(collars.lines), dtype=bool)
    if "azimuth" in collars.frame and "dip" in collars.frame:
        has_angles = ((collars.status("azimuth") == OK) & (collars.status("dip") == OK)
                      & _in_range(collars, "azimuth") & _in_range(collars, "dip"))
    if no_survey.any():
        collars.add(no_survey, "hole", "warning", lambda rows: [
            "the hole has no survey rows; its collar azimuth and dip are used" if a else
            "the hole has no survey rows and no collar azimuth and dip; it is taken as vertical"
            for a in has_angles[rows]])
    _all_surveys_in_error(collars, surveys, findings, has_angles)
    _collar_against_surveys(collars, surveys, order[good[order]], has_angles & ~no_survey, dip_convention)
    notices = _rising_holes(collars, surveys, order[good[order]], has_angles & no_survey, dip_convention,
                            n_ids)

    # ---- intervals
    intervals.code = hole_codes(intervals.holes, ids)
    intervals.add(intervals.named & (intervals.code < 0), "hole", "error",
                  lambda rows: [f"hole {shorten(h)!r} has no collar row" for h in intervals.holes[rows]])
    ok_from = intervals.missing("from", "from", "the interval has no from depth")
    ok_to = intervals.missing("to", "to", "the interval has no to depth")
    d_from, d_to = intervals.values("from"), intervals.values("to")
    intervals.add(ok_from & (d_from < 0), "from", "error",
                  lambda rows: [f"from depth {v:g} is negative" for v in d_from[rows]])
    both = ok_from & ok_to
    intervals.add(both & (d_from >= d_to), "to", "error", lambda rows: [
        f"from {a:g} is not above to {b:g}; an interval needs from < to" for a, b in zip(d_from[rows], d_to[rows])])
    eoh = np.where(intervals.code >= 0, end_depth[np.maximum(intervals.code, 0)], np.nan)
    intervals.add(ok_to & (d_to > eoh + DEPTH_TOLERANCE_M), "to", "error", lambda rows: [
        f"to {b:g} m is past the end of the hole ({e:g} m)" for b, e in zip(d_to[rows], eoh[rows])])
    good = both & (d_from < d_to) & (d_from >= 0) & (intervals.code >= 0)
    _overlap_errors(intervals, good, d_from, d_to)
    sampled = np.bincount(intervals.code[intervals.code >= 0], minlength=n_ids) > 0
    collars.add((collars.code >= 0) & ~sampled[np.maximum(collars.code, 0)], "hole", "warning",
                "the hole has no interval rows")
    return notices


#: Allowed angles (degrees, both ends included): an azimuth of 360 is north, as survey exports write it.
ANGLE_RANGES = {"azimuth": (0.0, 360.0), "dip": (-90.0, 90.0)}


def _in_range(view: _View, role) -> np.ndarray:
    low, high = ANGLE_RANGES[role]
    values = view.values(role)
    return ~((values < low) | (values > high))


def _angle_ranges(view: _View, role) -> np.ndarray:
    values = view.values(role)
    bad = (view.status(role) == OK) & ~_in_range(view, role)
    if role == "azimuth":
        sentence = "azimuth {v:g} is outside [0, 360]; write it as a bearing from 0 to 360"
    else:
        sentence = "dip {v:g} is outside [-90, 90]; dip is measured from horizontal"
    view.add(bad, role, "error", lambda rows: [sentence.format(v=v) for v in values[rows]])
    return ~bad


def _all_surveys_in_error(collars: _View, surveys: _View, findings: Findings, has_angles) -> None:
    """A hole whose every survey row is in error loses them all with --skip-bad-rows: it then follows
    its collar's azimuth and dip (a warning), or, when the collar has none, its path is unknown and
    the collar is in error (so the hole and its intervals are left out, never drilled vertical)."""
    in_error = {line for table, line, _, _, severity, _ in findings.rows() if table == "surveys" and
                severity == "error" and line is not None}
    known = surveys.code >= 0
    if not known.any():
        return
    bad_row = np.fromiter((int(line) in in_error for line in surveys.lines), dtype=bool, count=len(surveys.lines))
    n_ids = int(collars.code.max()) + 1 if (collars.code >= 0).any() else 0
    rows_of = np.bincount(surveys.code[known], minlength=n_ids)
    bad_of = np.bincount(surveys.code[known & bad_row], minlength=n_ids)
    lost = (rows_of > 0) & (bad_of == rows_of)
    if not lost.any():
        return
    lines_of: dict = {}
    for code, line in zip(surveys.code[known & bad_row], surveys.lines[known & bad_row]):
        if lost[code]:
            lines_of.setdefault(int(code), []).append(str(line))
    hit = (collars.code >= 0) & lost[np.maximum(collars.code, 0)]
    first = pd.Series(collars.code).duplicated(keep="first").to_numpy()
    hit &= ~first
    where = {r: ", ".join(lines_of[int(collars.code[r])][:5]) + (" ..." if len(lines_of[int(collars.code[r])]) > 5
                                                                  else "") for r in np.flatnonzero(hit)}
    collars.add(hit & has_angles, "hole", "warning", lambda rows: [
        f"every survey row of this hole is in error (lines {where[r]}): with --skip-bad-rows they are left out "
        "and the hole follows its collar azimuth and dip" for r in rows])
    collars.add(hit & ~has_angles, "hole", "error", lambda rows: [
        f"every survey row of this hole is in error (lines {where[r]}) and the collar has no azimuth and dip: "
        "the hole's path is unknown; fix the survey rows (with --skip-bad-rows the hole and its intervals are "
        "left out)" for r in rows])


COLLAR_SURVEY_DEG = 10.0  # collar angles further than this from the first survey are warned about


def _collar_against_surveys(collars: _View, surveys: _View, good_order, both, dip_convention) -> None:
    """Warn where a collar's azimuth and dip point more than COLLAR_SURVEY_DEG away from its hole's
    first survey station: the surveys are used, and the collar's angles would have drawn another hole."""
    from .desurvey import direction_vectors  # local: desurvey imports numba

    rows = np.flatnonzero(both)
    codes = surveys.code[good_order]
    if not len(rows) or not len(codes):
        return
    top = np.r_[True, codes[1:] != codes[:-1]]
    first_row = np.full(int(max(codes.max(), collars.code.max())) + 1, -1, dtype=np.int64)
    first_row[codes[top]] = good_order[top]
    station = first_row[collars.code[rows]]
    rows, station = rows[station >= 0], station[station >= 0]
    if not len(rows):
        return
    a = direction_vectors(collars.values("azimuth")[rows], collars.values("dip")[rows], dip_convention)
    b = direction_vectors(surveys.values("azimuth")[station], surveys.values("dip")[station], dip_convention)
    angle = np.degrees(np.arccos(np.clip(np.einsum("ij,ij->i", a, b), -1.0, 1.0)))
    far = angle > COLLAR_SURVEY_DEG
    mask = np.zeros(len(collars.lines), dtype=bool)
    mask[rows[far]] = True
    info = dict(zip(rows[far], zip(angle[far], station[far])))
    az, dip = collars.values("azimuth"), collars.values("dip")
    s_az, s_dip, s_at = surveys.values("azimuth"), surveys.values("dip"), surveys.values("survey_depth")
    collars.add(mask, "azimuth", "warning", lambda found: [
        f"the collar's azimuth and dip ({az[r]:g} / {dip[r]:g}) point {info[r][0]:.0f} degrees away from the first "
        f"survey row (line {surveys.lines[info[r][1]]}: {s_az[info[r][1]]:g} / {s_dip[info[r][1]]:g} at "
        f"{s_at[info[r][1]]:g} m); the survey rows are used: check both" for r in found])


def _rising_holes(collars: _View, surveys: _View, good_order, collar_only, dip_convention, n_ids) -> list[str]:
    """Warn about each hole that starts upward under the dip convention, and return a loud notice
    when most holes do: the usual sign of dips written positive downward without
    --dip-convention positive-down. ``good_order``: usable survey rows sorted by hole and depth;
    ``collar_only``: collar rows whose hole follows its collar angles."""
    sign = -1.0 if dip_convention == "positive-down" else 1.0
    first_dip = np.full(n_ids, np.nan)
    where_row = np.full(n_ids, -1, dtype=np.int64)
    codes = surveys.code[good_order]
    if len(codes):
        top = np.r_[True, codes[1:] != codes[:-1]]
        first_dip[codes[top]] = surveys.values("dip")[good_order][top]
        where_row[codes[top]] = good_order[top]
    rising_survey = np.zeros(len(surveys.lines), dtype=bool)
    ok = where_row >= 0
    rising_survey[where_row[ok & (sign * np.nan_to_num(first_dip) > 0)]] = True
    rising_collar = np.zeros(len(collars.lines), dtype=bool)
    if collar_only.any():
        dips = collars.values("dip")
        rising_collar = collar_only & (sign * np.nan_to_num(dips) > 0)
        first_dip[collars.code[collar_only]] = dips[collar_only]
    convention = "negative" if sign > 0 else "positive"
    sentence = ("the hole starts upward: dip {v:g} points up with dips {c} downward (--dip-convention); right for an "
                "underground up-hole, otherwise the dip sign is wrong")
    dip_values = surveys.values("dip")
    surveys.add(rising_survey, "dip", "warning",
                lambda rows: [sentence.format(v=dip_values[r], c=convention) for r in rows])
    collar_dips = collars.values("dip") if "dip" in collars.frame else np.zeros(len(collars.lines))
    collars.add(rising_collar, "dip", "warning",
                lambda rows: [sentence.format(v=collar_dips[r], c=convention) for r in rows])
    known = np.isfinite(first_dip)
    rising = int((sign * first_dip[known] > 0).sum())
    if known.sum() == 0 or rising <= known.sum() / 2:
        return []
    other = "positive-down" if dip_convention == "negative-down" else "negative-down"
    text = (f"{rising} of {int(known.sum())} holes would be drilled upward from their collars with "
            f"--dip-convention {dip_convention} (dips {convention} downward). If the dips of these tables are "
            f"{'positive' if sign > 0 else 'negative'} downward, give --dip-convention {other}.")
    collars.findings.add("surveys", None, "", surveys.columns.get("dip", "dip"), "warning", text)
    return [text]


def _dogleg_warnings(surveys: _View, order, dip_convention):
    """Warn about sharp bends between consecutive good stations (``order``: rows sorted by hole, depth)."""
    from .desurvey import direction_vectors  # local: desurvey imports numba

    if len(order) < 2:
        return
    at = surveys.values("survey_depth")[order]
    t = direction_vectors(surveys.values("azimuth")[order], surveys.values("dip")[order], dip_convention)
    code = surveys.code[order]
    same = code[1:] == code[:-1]
    cosang = np.clip(np.einsum("ij,ij->i", t[1:], t[:-1]), -1.0, 1.0)
    dogleg = np.degrees(np.arccos(cosang))
    with np.errstate(divide="ignore", invalid="ignore"):
        severity = dogleg * 30.0 / np.diff(at)
    bad = same & (dogleg >= DOGLEG_MIN_DEG) & (severity > DOGLEG_SEVERITY_DEG_PER_30M)
    mask = np.zeros(len(surveys.lines), dtype=bool)
    mask[order[1:][bad]] = True
    previous = dict(zip(order[1:][bad], surveys.lines[order[:-1][bad]]))
    bend = dict(zip(order[1:][bad], zip(dogleg[bad], severity[bad])))
    step = dict(zip(order[1:][bad], np.diff(at)[bad]))

    def sentence(r):
        if step[r] < SHORT_SURVEY_STEP_M:  # a rate per 30 m means nothing over a few centimetres
            return (f"the hole bends {bend[r][0]:.1f} degrees from the station at line {previous[r]}, only "
                    f"{step[r]:.3g} m above it; check both rows for a mistyped depth or angle")
        return (f"the hole bends {bend[r][0]:.1f} degrees from the station at line {previous[r]} "
                f"({bend[r][1]:.1f} degrees per 30 m); check both rows for a mistyped angle")

    surveys.add(mask, "azimuth", "warning", lambda rows: [sentence(r) for r in rows])


def _overlap_errors(intervals: _View, good, d_from, d_to):
    rows = np.flatnonzero(good)
    if len(rows) < 2:
        return
    order = rows[np.lexsort((d_to[rows], d_from[rows], intervals.code[rows]))]
    code = intervals.code[order]
    lines = intervals.lines[order]
    new_hole = np.r_[True, code[1:] != code[:-1]]
    # furthest 'to' reached so far in the hole, and the line that reached it
    reach, reach_line = segmented_running_max(new_hole, d_to[order], lines)
    prior = np.r_[np.nan, reach[:-1]]
    prior_line = np.r_[0, reach_line[:-1]]
    bad = ~new_hole & (d_from[order] < prior - DEPTH_TOLERANCE_M)
    mask = np.zeros(len(intervals.lines), dtype=bool)
    mask[order[bad]] = True
    info = dict(zip(order[bad], zip(prior_line[bad], prior[bad])))
    intervals.add(mask, "from", "error", lambda rows: [
        f"interval {d_from[r]:g}-{d_to[r]:g} overlaps the interval at line {info[r][0]}, which reaches "
        f"{info[r][1]:g}" for r in rows])
