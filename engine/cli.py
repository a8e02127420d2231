"""The ``drillaxis`` command line: parse, call the engine, write, report. Thin on purpose.

Exit codes: 0 success; 1 bad data (the message names file, line, hole and column); 2 bad usage.
Bad input never produces a traceback; a bug still does.
"""

from __future__ import annotations

import argparse
import contextlib
import dataclasses
import math
import sys
import time
from pathlib import Path

from .errors import DrillaxisError, FitError, UsageError, shorten

DESCRIPTION = (
    "drillaxis: validate and desurvey drillhole tables, composite them, and model the 3D variogram of "
    "each estimation domain. Outputs support, and do not replace, the judgment of a competent or "
    "qualified person under the public reporting code that applies."
)

CAUTION = ("Variogram models feed resource estimates that are publicly reported and on which investment and "
           "mine-planning decisions rest. This output supports, and does not replace, the judgment of a competent "
           "or qualified person under the public reporting code that applies; local codes and licensed practice "
           "prevail.")


# --------------------------------------------------------------------------------------------
# console helpers
# --------------------------------------------------------------------------------------------


class Console:
    """Prints results to stdout and progress to stderr (a bar only on a terminal)."""

    def __init__(self, quiet: bool = False):
        self.quiet = quiet
        self.bar_allowed = not quiet and sys.stderr.isatty()

    def say(self, text: str = ""):
        if not self.quiet:
            print(text, flush=True)

    def warn(self, text: str):
        """A warning the user must not miss: on stderr, marked, whatever stdout is piped to."""
        if not self.quiet:
            print(f"WARNING: {text}", file=sys.stderr, flush=True)

    @contextlib.contextmanager
    def stages(self, names):
        """Yield a function ``step(name)`` that advances a progress bar over the named stages."""
        if not self.bar_allowed:
            yield lambda name: None
            return
        import shutil

        from tqdm import tqdm

        size = shutil.get_terminal_size(fallback=(80, 24))  # a terminal reporting 0 x 0 gets 80 x 24
        with tqdm(total=len(names), file=sys.stderr, leave=False, unit="step",
                  ncols=min(size.columns or 80, 100), nrows=size.lines or 24,
                  bar_format="{desc:<28}{bar}| {n_fmt}/{total_fmt} [{elapsed}]") as bar:
            state = {"started": False}

            def step(name):
                if state["started"]:
                    bar.update(1)
                state["started"] = True
                bar.set_description_str(name)

            yield step
            if state["started"]:
                bar.update(1)


def _safe_streams():
    for stream in (sys.stdout, sys.stderr):
        with contextlib.suppress(AttributeError, ValueError):
            stream.reconfigure(errors="replace")


# --------------------------------------------------------------------------------------------
# options
# --------------------------------------------------------------------------------------------


def _number(low=None, high=None, *, above=False, integer=False):
    """An argparse type: a finite number (an integer with ``integer``) from ``low`` to ``high``
    (``above``: strictly above ``low``). A bad value exits 2 naming the option and its range."""
    def parse(text):
        try:
            value = int(text) if integer else float(text)
        except ValueError:
            raise argparse.ArgumentTypeError(f"{text!r} is not a number; give "
                                             f"{_range_text(low, high, above, integer)}") from None
        if not math.isfinite(value):
            raise argparse.ArgumentTypeError(f"{text!r} is not a finite number; give "
                                             f"{_range_text(low, high, above, integer)}")
        if (low is not None and (value <= low if above else value < low)) or (high is not None and value > high):
            raise argparse.ArgumentTypeError(f"{text!r} is out of range; give {_range_text(low, high, above, integer)}")
        return value

    return parse


def _range_text(low, high, above, integer) -> str:
    kind = "a whole number" if integer else "a number"
    if low is not None and high is not None:
        return f"{kind} above {low:g} and up to {high:g}" if above else f"{kind} from {low:g} to {high:g}"
    if low is not None:
        return f"{kind} above {low:g}" if above else f"{kind} of at least {low:g}"
    if high is not None:
        return f"{kind} up to {high:g}"
    return f"a finite {kind.split()[-1]}"


def _point(text):
    """``X,Y,Z`` in metres, three finite numbers."""
    try:
        point = [float(v) for v in str(text).split(",")]
    except ValueError:
        point = []
    if len(point) != 3 or not all(math.isfinite(v) for v in point):
        raise argparse.ArgumentTypeError(f"{text!r}: write X,Y,Z, three numbers, for example 24500,61200,300")
    return point


SCENE_LAGS = 12  # lag bins of the scene's pair direction
POSITIVE_M = _number(0.0, 1e6, above=True)
THREADS = _number(1, 1024, integer=True)
SEED = _number(0, 2**63 - 1, integer=True)


class _Parser(argparse.ArgumentParser):
    def error(self, message):  # exit 2 with one clear line and a hint (the usage dump buries the message)
        self.exit(2, f"{self.prog}: error: {message}\n(see '{self.prog} --help')\n")


def _table_options(parser: argparse.ArgumentParser, required: bool = True):
    group = parser.add_argument_group("tables")
    group.add_argument("--collars", required=required, metavar="FILE", help="collar table (CSV or Parquet)")
    group.add_argument("--surveys", required=required, metavar="FILE", help="survey table (CSV or Parquet)")
    group.add_argument("--intervals", required=required, metavar="FILE",
                       help="interval table: from, to, value and category columns (CSV or Parquet)")
    group.add_argument("--column", action="append", default=[], metavar="ROLE=NAME",
                       help="name the column of a role (hole, x, y, z, depth, at, azimuth, dip, from, "
                            "to); repeatable")
    group.add_argument("--dip-convention", choices=("negative-down", "positive-down"),
                       default="negative-down", help="sign of dip for holes drilled downward "
                                                     "(default: negative-down)")
    group.add_argument("--azimuth-offset", type=_number(-360, 360), default=0.0, metavar="DEG",
                       help="degrees added to every azimuth (declination or grid convergence)")
    group.add_argument("--below-detection", choices=("half", "limit", "zero", "missing"), default="half",
                       help="what a value such as '<0.01' becomes (default: half the limit)")
    group.add_argument("--missing-marker", action="append", default=[], metavar="TEXT",
                       help="a further cell text meaning not sampled, such as NS; repeatable")
    group.add_argument("--missing-code", action="append", default=[], type=_number(), metavar="NUMBER",
                       help="a number in value columns meaning not sampled, such as -99; repeatable")
    group.add_argument("--category", action="append", default=[], metavar="COLUMN",
                       help="treat an interval column as a text category even if it holds numbers")


def _common_options(parser: argparse.ArgumentParser, out_default=None):
    parser.add_argument("--out", required=out_default is None, default=out_default, metavar="DIR",
                        help="folder for the outputs (created if missing)")
    parser.add_argument("--quiet", action="store_true", help="print nothing but errors")


def _computing_options(parser: argparse.ArgumentParser):
    """Options of the commands that desurvey and compute from the tables."""
    parser.add_argument("--method", choices=("minimum-curvature", "balanced-tangential", "tangential"),
                        default="minimum-curvature", help="desurvey method (default: minimum-curvature)")
    parser.add_argument("--skip-bad-rows", action="store_true",
                        help="leave out rows with errors (listed in rejected.csv) instead of refusing to run")


def _composite_input(parser: argparse.ArgumentParser):
    """The composites file, the value column and the domain of the commands that read composites."""
    parser.add_argument("--composites", required=True, metavar="FILE", help="composites.csv (or any table with "
                        "hole, x, y, z and the value; from and to give the down-hole depth)")
    parser.add_argument("--value", required=True, metavar="COLUMN", help="the value column")
    parser.add_argument("--domain", metavar="COLUMN=VALUE", help="use only the composites of one domain")


def _fit_options(parser: argparse.ArgumentParser):
    """Options of the commands that fit a model."""
    group = parser.add_argument_group("fit")
    group.add_argument("--lag", type=POSITIVE_M, metavar="M", help="lag spacing (default: half the hole spacing, at "
                       "least twice the composite length)")
    group.add_argument("--lags", type=_number(3, 200, integer=True), default=12, metavar="N",
                       help="number of lags (default 12)")
    group.add_argument("--structures", choices=("auto", "1", "2"), default="auto",
                       help="nested structures (default auto: one or two, by cross-validation over groups of holes)")
    group.add_argument("--transform", choices=("none", "normal-score", "log"), default="none",
                       help="transform the values before fitting (default: none)")
    fixed = parser.add_argument_group("fixing parts of the model (the fit finds the rest)")
    fixed.add_argument("--nugget", type=_number(0, 1e300), metavar="C0",
                       help="the nugget at composite support, in the units of the values fitted")
    fixed.add_argument("--shape", choices=("spherical", "exponential", "gaussian"),
                       help="the shape of every structure (default: spherical or exponential, the better)")
    fixed.add_argument("--plane", metavar="DIPDIR/DIP", help="the plane of the major and semi-major axes: dip "
                       "direction 0 to 360 and dip 0 to 90; with --pitch or --major it fixes the axes")
    fixed.add_argument("--pitch", type=_number(0, 180), metavar="DEG", help="pitch of the major axis in --plane, "
                       "from its strike line (90 degrees anticlockwise of the dip direction)")
    fixed.add_argument("--major", metavar="TREND/PLUNGE", help="the major axis (with --plane: it must lie within 10 "
                       "degrees of the plane, and is projected into it)")
    fixed.add_argument("--model", metavar="FILE", help="refit a model.json on these data: its axes, shapes and number "
                       "of structures are kept; the nugget, sills and ranges are fitted")
    group.add_argument("--decluster-cell", type=_number(0, 1e6), metavar="M",
                       help="cell size of the cell declustering, metres (default: chosen from a scan of sizes up to "
                            "the spacing of the sparse drilling; 0: no declustering, every composite weighs one)")
    group.add_argument("--bootstrap", type=_number(0, 10000, integer=True), default=50, metavar="N",
                       help="hole-wise bootstrap replicates for the uncertainty (default 50; 0 leaves it out)")
    group.add_argument("--bootstrap-block", type=_number(0, 1e6), metavar="M",
                       help="resample blocks of holes whose tops "
                       "share an M metre square in plan (default: half the fitted major range; 0: single holes)")
    group.add_argument("--seed", type=SEED, default=0, help="seed of the bootstrap (default 0)")
    group.add_argument("--threads", type=THREADS, metavar="N", help="worker threads (default: all cores)")


def _scene_options(parser: argparse.ArgumentParser):
    group = parser.add_argument_group("scene")
    group.add_argument("--pairs-axis", choices=("major", "semi_major", "minor", "none"), default="major",
                       help="draw the pairs of a lag bin along this model axis (default: major)")
    group.add_argument("--pairs-direction", metavar="TREND/PLUNGE", help="draw the pairs along this direction "
                       "instead of a model axis")
    group.add_argument("--pairs-lag", type=_number(1, SCENE_LAGS, integer=True), metavar="K",
                       help="lag bin 1..12 of those pairs (default: the one "
                       "nearest half the range along the axis)")
    group.add_argument("--max-pairs", type=_number(1, 100000, integer=True), default=400, metavar="N",
                       help="pairs drawn at most (default 400)")
    group.add_argument("--fraction", type=_number(0, 10, above=True), default=1.0, metavar="F",
                       help="draw the ellipsoid at F x the ranges (default 1)")
    group.add_argument("--structures-apart", action="store_true", help="also one ellipsoid per nested structure")
    group.add_argument("--centre", type=_point, metavar="X,Y,Z", help="centre of the ellipsoid (default: the data "
                       "centre)")
    group.add_argument("--collar-labels", action="store_true", help="label each hole at its top composite")
    group.add_argument("--size", type=_number(200, 8000, integer=True), nargs=2, default=(1600, 1200),
                       metavar=("W", "H"),
                       help="image size in pixels (default 1600 1200)")


def _detrend_option(parser: argparse.ArgumentParser):
    parser.add_argument("--detrend", choices=("none", "linear", "quadratic"), default="none",
                        help="fit a polynomial trend in the coordinates and model the residuals (default: none)")


def build_parser() -> argparse.ArgumentParser:
    parser = _Parser(prog="drillaxis", description=DESCRIPTION)
    from . import __version__

    parser.add_argument("--version", action="version", version=f"drillaxis {__version__}")
    commands = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)
    commands.required = True

    p = commands.add_parser("check", help="validate the tables and list every problem",
                            description="Validate collar, survey and interval tables. Writes "
                                        "findings.csv and rejected.csv (the rows --skip-bad-rows would "
                                        "leave out). Exit 0 without errors (warnings allowed), 1 with.")
    _table_options(p)
    _common_options(p)

    p = commands.add_parser("desurvey", help="3D positions of hole traces and samples",
                            description="Desurvey the holes: traces.csv (stations and every --step "
                                        "metres) and samples.csv (each interval's mid-point).")
    _table_options(p)
    _computing_options(p)
    p.add_argument("--step", type=_number(0, 1000, above=True), default=1.0, metavar="M",
                   help="trace spacing in metres (default 1)")
    _common_options(p)

    p = commands.add_parser("composite", help="composite samples to a common length, keeping metal",
                            description="Desurvey and composite the intervals. Writes composites.csv, "
                                        "composite_check.csv (metal in = metal out, per hole, domain "
                                        "and value), composite_summary.json and rejected.csv.")
    _table_options(p)
    shape = p.add_argument_group("composites")
    shape.add_argument("--length", type=_number(0, 10000, above=True), metavar="L", help="composite length in metres")
    shape.add_argument("--domain", metavar="COLUMN", help="category column whose changes break composites")
    shape.add_argument("--residual", choices=("merge", "drop", "keep"), default="merge",
                       help="rule for the short piece at the end of a run (default: merge)")
    shape.add_argument("--merge-below", type=_number(0, 1, above=True), default=0.5, metavar="F",
                       help="merge joins a residual shorter than F x L to the previous composite (default 0.5)")
    shape.add_argument("--equal", action="store_true",
                       help="split each run into round(run / L) composites of equal length")
    shape.add_argument("--min-coverage", type=_number(0, 1), default=0.5, metavar="F",
                       help="leave out composites whose sampled length is below F x length (default 0.5)")
    shape.add_argument("--density", metavar="COLUMN", help="weight by length x density from this column")
    shape.add_argument("--density-default", type=_number(0, 100, above=True), metavar="VALUE",
                       help="density to use where the density column is missing")
    shape.add_argument("--whole-run", action="store_true", help="one composite per run (domain intersection)")
    shape.add_argument("--bench", type=_number(0, 10000, above=True), metavar="H",
                       help="composite by slices of elevation H metres high")
    shape.add_argument("--bench-base", type=_number(-1e8, 1e8), default=0.0, metavar="Z",
                       help="an elevation on a bench boundary (default 0)")
    shape.add_argument("--cap", action="append", default=[], metavar="COLUMN=VALUE",
                       help="cap a value column before compositing; repeatable")
    _computing_options(p)
    _common_options(p)

    p = commands.add_parser("variogram", help="experimental variograms from composites",
                            description="Experimental variograms of one value column: omnidirectional, "
                                        "directional, down-hole and the variogram volume, in one pass "
                                        "over the pairs. Writes variograms.csv and volume.npz.")
    _composite_input(p)
    lags = p.add_argument_group("lags")
    lags.add_argument("--lag", type=POSITIVE_M, metavar="M", help="lag spacing in metres (default: from the data)")
    lags.add_argument("--lags", type=_number(1, 1000, integer=True), default=10, metavar="N",
                      help="number of lags (default 10)")
    lags.add_argument("--lag-tolerance", type=_number(0, 1e6), metavar="M",
                      help="lag tolerance (default: half the lag)")
    sets = p.add_argument_group("sets (none named: omnidirectional, down-hole and the volume)")
    sets.add_argument("--omni", action="store_true", help="the omnidirectional variogram")
    sets.add_argument("--directions", metavar="T/P,...", help="directions as trend/plunge, comma separated")
    sets.add_argument("--fan", action="append", default=[], metavar="DIPDIR/DIP/N",
                      help="N directions evenly spaced in a plane of that dip direction and dip (0/0/18: a "
                           "horizontal fan every 10 degrees); repeatable")
    sets.add_argument("--angle-tolerance", type=_number(0, 90, above=True), default=22.5, metavar="DEG",
                      help="half-angle of the directional cone (default 22.5)")
    sets.add_argument("--bandwidth", type=POSITIVE_M, default=math.inf, metavar="M",
                      help="largest distance across the direction's vertical plane (default: none)")
    sets.add_argument("--vertical-bandwidth", type=POSITIVE_M, default=math.inf, metavar="M",
                      help="largest distance within that plane, perpendicular to the direction (default: none)")
    sets.add_argument("--downhole", action="store_true", help="pairs within a hole by along-hole separation")
    sets.add_argument("--downhole-lag", type=POSITIVE_M, metavar="M", help="down-hole lag (default: the median "
                      "composite length)")
    sets.add_argument("--volume", action="store_true", help="the variogram volume (a grid of lag vectors)")
    sets.add_argument("--volume-cells", type=_number(1, 60, integer=True), nargs=3, default=(20, 20, 10),
                      metavar=("NX", "NY", "NZ"),
                      help="cells each side of zero along east, north, up (default 20 20 10)")
    p.add_argument("--measure", default="semivariogram",
                   choices=("semivariogram", "standardized", "standardized-by-lag", "covariance", "correlogram",
                            "pairwise-relative", "general-relative", "madogram"),
                   help="what to compute (default: semivariogram). standardized: over the variance of the values "
                        "(sill 1); standardized-by-lag: over the variance of each lag's own pairs")
    p.add_argument("--transform", choices=("none", "normal-score", "log"), default="none",
                   help="transform the values before the pass (default: none)")
    p.add_argument("--indicator", type=_number(), metavar="THRESHOLD",
                   help="variogram of the indicator value <= THRESHOLD instead of the value")
    p.add_argument("--pairs", choices=("all", "across-holes", "same-hole"), default="all",
                   help="which pairs to use (default: all)")
    p.add_argument("--threads", type=THREADS, metavar="N", help="worker threads (default: all cores)")
    p.add_argument("--dask", metavar="ADDRESS", help="run the pair work on a Dask cluster: tcp://host:port, or "
                   "local:N for N local worker processes")
    _common_options(p)

    p = commands.add_parser("stationarity", help="is the domain stationary enough for variography?",
                            description="Check the composites of one value column for a trend in the mean, a "
                                        "proportional effect, mixed populations, a variogram without a sill and "
                                        "differences between two halves. Writes stationarity.json and its "
                                        "figures (stationarity_*.png); with --detrend also trend.csv.")
    _composite_input(p)
    _detrend_option(p)
    p.add_argument("--model", metavar="FILE", help="a model.json whose axes get swaths too")
    p.add_argument("--threads", type=THREADS, metavar="N", help="worker threads (default: all cores)")
    _common_options(p)

    p = commands.add_parser("fit", help="principal directions and the fitted variogram model",
                            description="Find the directions of greatest, intermediate and least continuity, "
                                        "fit a nugget and nested structures with the anisotropy ellipsoid, "
                                        "bootstrap their uncertainty by holes and check the drill pattern. "
                                        "Writes model.json, pattern.json and fit_variograms.csv.")
    _composite_input(p)
    _fit_options(p)
    _detrend_option(p)
    _common_options(p)

    p = commands.add_parser("view", help="the 3D scene: holes, pairs, ellipsoid and variogram volume",
                            description="Draw the drill traces coloured by value, the pairs of one lag bin "
                                        "along a model axis, the fitted ellipsoid with its axes and the "
                                        "variogram volume's isosurfaces. Writes scene.png (down the minor "
                                        "axis), scene_plan.png, scene_section.png, scene.html (interactive, "
                                        "standalone) and scene.vtm (the datasets, for any VTK reader).")
    p.add_argument("--composites", required=True, metavar="FILE", help="composites.csv (hole, from, to, x, y, z "
                   "and the value)")
    p.add_argument("--model", required=True, metavar="FILE", help="model.json of drillaxis fit or run")
    p.add_argument("--value", metavar="COLUMN", help="value column to colour by (default: the model's variable)")
    p.add_argument("--domain", metavar="COLUMN=VALUE", help="composites of one domain (default: the model's)")
    p.add_argument("--units", default="", metavar="TEXT", help="units of the value, for the colour bar")
    _scene_options(p)
    p.add_argument("--show", action="store_true", help="also open an interactive window (needs a display)")
    _common_options(p)

    p = commands.add_parser("run", help="composite, check stationarity, fit, check the pattern, report",
                            description="Desurvey and composite the tables, check the stationarity of one value "
                                        "column (optionally in one domain), fit its variogram model, check the "
                                        "drill pattern and write report.html. Writes every file of the steps "
                                        "into --out.")
    _table_options(p)
    _computing_options(p)
    p.add_argument("--value", required=True, metavar="COLUMN", help="the value column to fit")
    p.add_argument("--domain", metavar="COLUMN=VALUE", help="composite by domain column COLUMN and fit VALUE's "
                   "composites only")
    p.add_argument("--length", type=_number(0, 10000, above=True), default=2.0, metavar="M",
                   help="composite length (default 2)")
    p.add_argument("--units", default="", metavar="TEXT", help="units of the value, for the scene's colour bar")
    _fit_options(p)
    _detrend_option(p)
    _scene_options(p)
    _common_options(p)

    p = commands.add_parser("demo", help="run the workflow on a built-in synthetic drill program",
                            description="Generate the invented Tarn Hill drill program with a known "
                                        "anisotropy, run the workflow on it and compare with the truth.")
    p.add_argument("--seed", type=SEED, default=2026, help="random seed of the program (default 2026)")
    _common_options(p, out_default="drillaxis-demo")
    return parser


# --------------------------------------------------------------------------------------------
# shared steps
# --------------------------------------------------------------------------------------------


def _read(args, notes: list | None = None):
    """Read and validate the tables. ``notes``: sentences for the console (a renamed option)."""
    from .tables import parse_column_options, read_tables

    from .errors import list_some
    from .tables import find_column

    categories = list(args.category)
    if getattr(args, "domain", None):
        categories += _domain_candidates(args.domain)
    tables = read_tables(
        args.collars, args.surveys, args.intervals,
        columns=parse_column_options(args.column, notes),
        dip_convention=args.dip_convention,
        below_detection=args.below_detection,
        missing_markers=args.missing_marker,
        missing_codes=args.missing_code,
        category_columns=categories,
    )
    for name in args.category:
        if find_column(tables.category_columns, name) is None:
            raise UsageError(f"--category {name!r}: not an interval column other than hole, from and to. Interval "
                             f"columns: {list_some(tables.value_columns + tables.category_columns, 40)}.")
    return tables


#: What each command writes into --out (names and glob patterns), removed at its start so that a
#: folder never holds one run's files beside another's.
TABLE_OUTPUTS = ("findings.csv", "rejected.csv")
DESURVEY_OUTPUTS = ("traces.csv", "samples.csv")
COMPOSITE_OUTPUTS = ("composites.csv", "composite_check.csv", "composite_summary.json")
STATIONARITY_OUTPUTS = ("stationarity.json", "stationarity_*.png", "trend.csv")
VARIOGRAM_OUTPUTS = ("variograms.csv", "volume.npz")
FIT_OUTPUTS = ("model.json", "pattern.json", "fit_variograms.csv", *VARIOGRAM_OUTPUTS)
SCENE_OUTPUTS = ("scene.png", "scene_plan.png", "scene_section.png", "scene.html", "scene.vtm", "scene")
RUN_OUTPUTS = (*TABLE_OUTPUTS, *COMPOSITE_OUTPUTS, *STATIONARITY_OUTPUTS, *FIT_OUTPUTS, *SCENE_OUTPUTS, "report.html")
OUTPUTS = {"check": TABLE_OUTPUTS, "desurvey": (*TABLE_OUTPUTS, *DESURVEY_OUTPUTS),
           "composite": (*TABLE_OUTPUTS, *COMPOSITE_OUTPUTS), "variogram": VARIOGRAM_OUTPUTS,
           "stationarity": STATIONARITY_OUTPUTS, "fit": FIT_OUTPUTS, "view": SCENE_OUTPUTS, "run": RUN_OUTPUTS,
           "demo": (*RUN_OUTPUTS, *DESURVEY_OUTPUTS, "data")}


def _out_dir(args):
    """The command's output folder (created, checked writable); its old outputs go at ``clear()``.
    Bad usage when an input file would be overwritten (or removed) by an output of this command."""
    from fnmatch import fnmatch

    from .outputs import MANIFEST, OutputFolder

    if not str(args.out).strip():
        raise UsageError("--out '': give the folder for the outputs.")
    outputs = OUTPUTS[args.command]
    out = Path(args.out).resolve()
    for option in ("collars", "surveys", "intervals", "composites", "model"):
        given = getattr(args, option, None)
        if not given:
            continue
        path = Path(given).resolve()
        relative = path.relative_to(out).as_posix() if path.is_relative_to(out) else None
        if relative is not None and (relative == MANIFEST or any(fnmatch(relative, p) or
                                                                 relative.startswith(p.rstrip("/") + "/")
                                                                 for p in outputs)):
            raise UsageError(f"--out {str(args.out)!r}: the {option} file {str(given)!r} lies there under a name "
                             f"that drillaxis {args.command} writes, and would be overwritten; give another --out "
                             "folder or rename the input.")
    return OutputFolder(args.out, args.command, outputs)


def _write_findings(tables, rejected, out: Path) -> None:
    from .outputs import write_csv

    write_csv(tables.findings, out / "findings.csv")
    write_csv(rejected, out / "rejected.csv")


def _checked_tables(args, folder, console: Console, need_intervals: bool = True, check=None):
    """Read and validate; ``check(tables)`` may refuse the options against the tables before anything
    is written; then the folder is cleared and findings.csv and rejected.csv (the rows that
    --skip-bad-rows leaves out) are written. Returns the usable tables and the rejected rows, or
    raises ValidationError when errors remain and rows may not be skipped, or when no row is left."""
    notes = []
    tables = _read(args, notes)
    for note in notes:
        console.warn(note)
    if check is not None:
        check(tables)
    folder.clear()
    _write_findings(tables, _rows_would_reject(tables), folder.path)
    for notice in tables.notices:
        console.warn(notice)
    usable, rejected = tables.usable(skip_bad_rows=getattr(args, "skip_bad_rows", False))
    from .errors import ValidationError

    if len(usable.collars) == 0:
        raise ValidationError(f"no collar row is left to work with: all {len(tables.collars)} were rejected "
                              f"(reasons in {folder.path / 'rejected.csv'}).")
    if need_intervals and len(usable.intervals) == 0:
        raise ValidationError(f"no interval row is left to work with: all {len(tables.intervals)} were rejected "
                              f"(reasons in {folder.path / 'rejected.csv'}).")
    return usable, rejected


def _findings_line(tables, out: Path, console: Console):
    """One line on the console when the tables hold findings (check prints them in full)."""
    if len(tables.findings):
        console.say(f"findings: {tables.error_count} error(s), {tables.warning_count} warning(s) -> "
                    f"{out / 'findings.csv'}")


def _rows_would_reject(tables):
    _, rejected = tables.usable(skip_bad_rows=True)
    return rejected


def _domain_candidates(text) -> list[str]:
    """Every column name that ``COLUMN=VALUE`` could mean (a column's own name may hold '=')."""
    text = str(text)
    return [text[:i].strip() for i, ch in enumerate(text) if ch == "="] or [text.strip()]


def _domain_column(text, columns, option="--domain"):
    """The column and value of ``COLUMN=VALUE``; COLUMN is the name as the input spells it (case,
    spaces and separators aside). Bad usage when it names no column."""
    from .errors import list_some
    from .tables import find_column

    text = str(text)
    if "=" not in text:
        raise UsageError(f"{option} {text!r}: write COLUMN=VALUE, for example {option} domain=FRESH.")
    for i, ch in enumerate(text):
        if ch == "=":
            found = find_column(columns, text[:i].strip())
            if found is not None:
                return found, text[i + 1:].strip()
    raise UsageError(f"{option} {text!r}: no column {text.split('=', 1)[0].strip()!r}. Columns: "
                     f"{list_some(columns, 40)}.")


def _value_column(name, columns, where="the composites", option="--value", categories=()):
    """The value column as its table spells it; bad usage (exit 2) listing the columns when absent,
    naming the columns it could mean when several differ only in case, and saying so when it was read
    as a category (some of its cells are not numbers)."""
    from .errors import list_some
    from .tables import find_column, normalise_name

    found = find_column(columns, name)
    if found is not None:
        return found
    alike = [c for c in columns if normalise_name(c) == normalise_name(name)]
    if len(alike) > 1:
        raise UsageError(f"{option} {name!r}: several columns of {where} could be meant ({list_some(alike)}); give "
                         "the name exactly as written.")
    category = find_column(categories, name)
    if category is not None:
        raise UsageError(f"{option} {name!r}: column {category!r} was read as a category, not as values: some of its "
                         "cells are not numbers (see the warning in findings.csv); fix them, or name their text "
                         "with --missing-marker.")
    raise UsageError(f"{option} {name!r}: no such column in {where}. Columns: {list_some(columns, 40)}.")


def _some_names(names, limit: int = 30) -> str:
    names = [shorten(n) for n in names]
    if not names:
        return "(none)"
    return ", ".join(names[:limit]) + (f" and {len(names) - limit} more" if len(names) > limit else "")


def _findings_summary(tables, console: Console, out: Path, limit: int = 10):
    counts = tables.row_counts()
    console.say(
        f"tables: {counts['collars']} collar rows, {counts['surveys']} survey rows, "
        f"{counts['intervals']} interval rows"
    )
    console.say(f"  value columns: {_some_names(tables.value_columns)}")
    console.say(f"  category columns: {_some_names(tables.category_columns)}")
    findings = tables.findings
    console.say(f"findings: {tables.error_count} error(s), {tables.warning_count} warning(s) "
                f"-> {out / 'findings.csv'}")
    if len(findings):
        by = findings.groupby(["table", "severity"]).size()
        for (table, severity), n in by.items():
            console.say(f"  {table}: {n} {severity}(s)")
        shown = findings.sort_values("severity", kind="stable").head(limit)
        for row in shown.itertuples(index=False):
            line = "" if row.line is None or str(row.line) == "<NA>" else f" line {row.line}"
            hole = f" hole {shorten(row.hole)!r}" if row.hole else ""
            console.say(f"  {row.severity}: {row.table}{line}{hole} {shorten(row.column)}: {row.problem}")
        if len(findings) > limit:
            console.say(f"  ... and {len(findings) - limit} more in findings.csv")


# --------------------------------------------------------------------------------------------
# commands
# --------------------------------------------------------------------------------------------


def cmd_check(args, console: Console) -> int:
    folder = _out_dir(args)
    out = folder.path
    with console.stages(["reading and validating", "writing findings"]) as step:
        step("reading and validating")
        notes = []
        tables = _read(args, notes)
        step("writing findings")
        folder.clear()
        rejected = _rows_would_reject(tables)
        _write_findings(tables, rejected, out)
    for note in notes:
        console.warn(note)
    _findings_summary(tables, console, out)
    for notice in tables.notices:
        console.warn(notice)
    folder.finish()
    if tables.error_count:
        console.say(f"{len(rejected)} row(s) would be left out with --skip-bad-rows -> {out / 'rejected.csv'}")
        return 1
    return 0


def _desurvey(tables, args, out: Path, console: Console, step):
    from .desurvey import Desurvey, sample_positions
    from .outputs import write_csv

    step("desurveying")
    trace = Desurvey(args.method, args.dip_convention, args.azimuth_offset).fit(tables.collars, tables.surveys)
    traces = trace.traces(args.step)
    samples = sample_positions(trace, tables.intervals, tables.value_columns, tables.category_columns)
    step("writing traces and samples")
    write_csv(traces, out / "traces.csv")
    write_csv(samples, out / "samples.csv")
    return trace, traces, samples


def _desurvey_summary(trace, traces, samples, method, out, console):
    lo = samples[["x", "y", "z"]].min().to_numpy()
    hi = samples[["x", "y", "z"]].max().to_numpy()
    console.say(f"desurvey ({method}): {len(trace.hole_ids_)} holes, {len(trace.depth_)} stations, "
                f"{len(traces)} trace points -> {out / 'traces.csv'}")
    console.say(f"  {len(samples)} samples -> {out / 'samples.csv'}")
    if len(samples):
        console.say(f"  extent: east {lo[0]:.1f} to {hi[0]:.1f}, north {lo[1]:.1f} to {hi[1]:.1f}, "
                    f"elevation {lo[2]:.1f} to {hi[2]:.1f} m")


def cmd_desurvey(args, console: Console) -> int:
    folder = _out_dir(args)
    out = folder.path
    with console.stages(["reading and validating", "desurveying", "writing traces and samples"]) as step:
        step("reading and validating")
        tables, rejected = _checked_tables(args, folder, console, need_intervals=False)
        trace, traces, samples = _desurvey(tables, args, out, console, step)
    _findings_line(tables, out, console)
    if len(rejected):
        console.say(f"{len(rejected)} row(s) left out -> {out / 'rejected.csv'}")
    _desurvey_summary(trace, traces, samples, args.method, out, console)
    folder.finish()
    return 0


def _composite_options(args, domain=None):
    """The compositing options; ``domain``: the domain column as the tables spell it."""
    from .composite import CompositeOptions

    modes = [name for name, on in (("--length", args.length is not None), ("--whole-run", args.whole_run),
                                   ("--bench", args.bench is not None)) if on]
    if len(modes) > 1:
        raise UsageError(f"{' and '.join(modes)} are {len(modes)} ways of compositing: give one.")
    if not modes:
        raise UsageError("give --length L (fixed-length composites), --whole-run or --bench H.")
    caps = {}
    seen = set()
    for item in args.cap:
        column, _, value = item.rpartition("=")  # a column's name may hold '='; a number never does
        try:
            cap = float(value)
        except ValueError:
            cap = math.nan
        if not column.strip() or not math.isfinite(cap):
            raise UsageError(f"--cap {item!r}: write COLUMN=VALUE with a finite number, for example --cap au_gpt=30.")
        from .tables import normalise_name

        if normalise_name(column) in seen:
            raise UsageError(f"--cap {item!r}: {column.strip()!r} is capped twice; give one cap per column.")
        seen.add(normalise_name(column))
        caps[column.strip()] = cap
    mode = "whole-run" if args.whole_run else "bench" if args.bench is not None else "length"
    return CompositeOptions(
        length_m=args.length, domain=domain, residual=args.residual, merge_below=args.merge_below,
        equal=args.equal, min_coverage=args.min_coverage, density=args.density,
        density_default=args.density_default, mode=mode, bench_height_m=args.bench,
        bench_base_m=args.bench_base, caps=caps,
    )


def _resolve_composite_columns(options, tables):
    """Options naming columns as the tables spell them (case and separators aside), or bad usage."""
    from .errors import list_some
    from .tables import find_column

    def column(name, among, option, kind):
        found = find_column(among, name)
        if found is None:
            if kind == "value" and find_column(tables.category_columns, name) is not None:
                raise UsageError(f"{option} {name!r}: that column was read as a category, not as values: some of "
                                 "its cells are not numbers (see findings.csv).")
            raise UsageError(f"{option} {name!r}: no such {kind} column. {kind.capitalize()} columns: "
                             f"{list_some(among, 40)}.")
        return found

    if options.domain is not None:
        options.domain = column(options.domain, tables.category_columns, "--domain", "category")
    if options.density is not None:
        options.density = column(options.density, tables.value_columns, "--density", "value")
    options.caps = {column(c, tables.value_columns, "--cap", "value"): v for c, v in options.caps.items()}
    return options


def _composite(tables, rejected, options, args, out: Path, step, trace=None):
    import pandas as pd

    from .composite import composite
    from .desurvey import Desurvey
    from .outputs import write_csv, write_json

    if trace is None:
        step("desurveying")
        trace = Desurvey(args.method, args.dip_convention, args.azimuth_offset).fit(tables.collars, tables.surveys)
    step("compositing")
    columns = ["hole", "from", "to", "_line", *tables.value_columns] + ([options.domain] if options.domain else [])
    result = composite(tables.intervals[columns], tables.value_columns, options, trace)
    step("writing composites")
    write_csv(result.composites, out / "composites.csv")
    write_csv(result.check, out / "composite_check.csv")
    write_json(result.summary, out / "composite_summary.json")
    left = pd.concat([rejected, result.left_out], ignore_index=True)
    first = [c for c in ("table", "line", "hole", "from", "to", "domain", "reason") if c in left.columns]
    write_csv(left[first + [c for c in left.columns if c not in first]], out / "rejected.csv")
    return result


def _composite_summary(result, out: Path, console: Console):
    s = result.summary
    console.say(f"composites ({s['mode']}): {s['composites']} from {s['samples']} samples in {s['runs']} runs "
                f"-> {out / 'composites.csv'}")
    console.say(f"  weighting: {s['weighting']}")
    left = s["left_out"]
    if left["residuals_dropped"] or left["below_min_coverage"]:
        console.say(f"  left out: {left['residuals_dropped']} residual(s) dropped, {left['below_min_coverage']} "
                    f"below the minimum coverage (listed with their metal in rejected.csv)")
    for cap in s["caps"]:
        share = cap["metal_removed"] / cap["metal_before"] if cap["metal_before"] else 0.0
        console.say(f"  cap {cap['column']} at {cap['cap']:g}: {cap['samples_capped']} sample(s) capped, "
                    f"metal removed {cap['metal_removed']:.6g} ({100 * share:.2f}%)")
    for warning in result.warnings:
        console.say(f"  warning: {warning}")
    console.say(f"  metal check: largest difference {s['largest_metal_difference']:.3g} (relative "
                f"{s['largest_relative_metal_difference']:.2g}) -> {out / 'composite_check.csv'}")


def cmd_composite(args, console: Console) -> int:
    folder = _out_dir(args)
    out = folder.path
    _composite_options(args)  # usage errors before any reading
    options = None

    def check(tables):
        nonlocal options
        options = _resolve_composite_columns(_composite_options(args, args.domain), tables)

    names = ["reading and validating", "desurveying", "compositing", "writing composites"]
    with console.stages(names) as step:
        step(names[0])
        tables, rejected = _checked_tables(args, folder, console, check=check)
        result = _composite(tables, rejected, options, args, out, step)
    _findings_line(tables, out, console)
    if len(rejected):
        console.say(f"{len(rejected)} input row(s) left out -> {out / 'rejected.csv'}")
    _composite_summary(result, out, console)
    folder.finish()
    return 0


def _read_composites(path, value, domain, varying=True, domain_option="--domain") -> "Composites":
    from .tables import normalise_name, read_raw_table

    # the hole ids and the domain column read as written: codes such as 007 or 02 stay text
    text = {"hole"} | ({normalise_name(c) for c in _domain_candidates(domain)} if domain else set())
    raw = read_raw_table(path, "composites", frozenset(text))
    return _composites_arrays(raw.frame, value, domain, path, varying, domain_option)


def _left_out_summary(data: "Composites", console: Console):
    if data.unplaced:
        console.say(f"  {data.unplaced} composite(s) without a position left out")
    if data.without_value:
        console.say(f"  {data.without_value} composite(s) without a value of {data.value} left out (sampling gaps "
                    "or missing assays)")


def _domain_rows(frame, column, wanted, path, option="--domain"):
    """The rows whose ``column`` reads ``wanted``; bad usage listing the values present when none do."""
    import pandas as pd

    from .errors import list_some

    text = frame[column].astype(str).where(frame[column].notna(), "")
    rows = frame[(text == wanted).to_numpy()]
    if rows.empty:
        present = pd.unique(text[text != ""])
        near = [v for v in present if v.lower() == wanted.lower()]
        hint = f" (did you mean {near[0]!r}? values are compared exactly)" if near else ""
        raise UsageError(f"{option} {column}={shorten(wanted)}: no row of {path} has {column} = "
                         f"{shorten(wanted)!r}{hint}. Values present: {list_some(sorted(present), 30)}.")
    return rows


@dataclasses.dataclass
class Composites:
    """The composites of one value (and domain) as arrays for the engine: positions, values, hole
    numbers (their names are ``hole_names``), mid-depths, the median length, how many were left out
    for want of a position; ``rows`` the table rows used (same order) and ``whole`` the table read.
    ``value`` and ``domain_column`` are spelt as the table spells them."""

    xyz: object
    values: object
    hole: object
    depth: object
    length: float | None
    unplaced: int
    rows: object
    whole: object
    value: str
    domain_column: str | None = None
    domain_value: str | None = None
    without_value: int = 0  # composites placed but with no finite value (missing in the variograms)

    @property
    def domain_text(self):
        return f"{self.domain_column}={self.domain_value}" if self.domain_column else None

    @property
    def ends(self):
        """From and to of each composite used (n, 2), or None."""
        import numpy as np

        if {"from", "to"} <= set(self.rows.columns):
            return self.rows[["from", "to"]].to_numpy(dtype=np.float64)
        return None

    @property
    def hole_names(self):
        import pandas as pd

        return pd.factorize(self.rows["hole"])[1]


def _composites_arrays(frame, value, domain, path="the composites", varying=True,
                       domain_option="--domain") -> Composites:
    """The composites of ``value`` (a column) in ``domain`` (None or ``COLUMN=VALUE``, COLUMN as the
    input tables spell it); ``varying``: refuse values that do not vary."""
    import numpy as np
    import pandas as pd

    from .errors import TableError, list_some
    from .variogram import require_variation

    whole = frame
    missing = [c for c in ("hole", "x", "y", "z") if c not in frame.columns]
    if missing:
        raise TableError(f"{path}: no column {', '.join(map(repr, missing))}: not a composites table. Columns "
                         f"found: {list_some(frame.columns, 40)}.")
    value = _value_column(value, list(frame.columns), path)
    column = wanted = None
    where = ""
    if domain:
        column, wanted = _domain_column(domain, list(frame.columns), domain_option)
        frame = _domain_rows(frame, column, wanted, path, domain_option)
        where = f" in {column} = {shorten(wanted)}"
    try:
        xyz = frame[["x", "y", "z"]].to_numpy(dtype=np.float64)
        values = pd.to_numeric(frame[value], errors="raise").to_numpy(dtype=np.float64)
        ends = frame[["from", "to"]].to_numpy(dtype=np.float64) if {"from", "to"} <= set(frame.columns) else None
    except (ValueError, TypeError) as exc:
        raise TableError(f"{path}: columns x, y, z, from, to and {value!r} must hold numbers ({exc}).") from None
    keep = np.isfinite(xyz).all(axis=1)
    if not keep.any():
        raise TableError(f"{path}: no composite{where} has a position (x, y, z).")
    values = np.where(np.isfinite(values), values, np.nan)  # an infinity is no value either
    without = int(np.isnan(values[keep]).sum())
    if varying:
        require_variation(values[keep], f"{value!r}{where}")
    hole = pd.factorize(frame["hole"][keep])[0]  # codes of the rows kept: their names are factorize(rows)[1]
    if ends is not None:
        depth = 0.5 * (ends[:, 0] + ends[:, 1])
        length = float(np.nanmedian(ends[:, 1] - ends[:, 0])) if np.isfinite(ends).any() else None
    else:
        depth, length = np.zeros(len(frame)), None
    return Composites(xyz[keep], values[keep], hole, depth[keep], length, int((~keep).sum()), frame[keep], whole,
                      value, column, wanted, without)


def cmd_variogram(args, console: Console) -> int:
    import numpy as np

    from .errors import TableError
    from .pairs import PairIndex
    from .pairs import _kernels as k
    from .variogram import (Direction, LagBins, Sets, VolumeGrid, accumulate, fan, indicator, require_variation,
                            variogram_table)

    folder = _out_dir(args)
    out = folder.path
    names = ["reading composites", "building the pair index", "counting pairs", "writing variograms"]
    with console.stages(names) as step:
        step(names[0])
        data = _read_composites(args.composites, args.value, args.domain)
        xyz, values, hole, depth, length = data.xyz, data.values, data.hole, data.depth, data.length
        args.value = data.value
        values = _transformed(values, args.transform, data.value)
        if args.indicator is not None:
            values = indicator(values, args.indicator)
            require_variation(values, f"the indicator of {data.value!r} at {args.indicator:g} (1 at or below it, "
                              "0 above)")
        if args.measure in ("pairwise-relative", "general-relative"):
            below = int(np.sum(values[np.isfinite(values)] < 0))
            if below:
                raise UsageError(f"--measure {args.measure}: {below} value(s) of {data.value!r} are below zero; a "
                                 "relative variogram divides by the pair mean and needs values at or above zero.")
        lag = args.lag
        if lag is None:  # a tenth of a third of the largest extent, rounded
            extent = float(np.max(xyz.max(axis=0) - xyz.min(axis=0)))
            lag = max(float(np.round(extent / 30.0, 1)), 1e-3)
        bins = LagBins(lag, args.lags, args.lag_tolerance)
        directions = []
        if args.directions is not None:
            if not args.directions.strip():
                raise UsageError("--directions '': give at least one direction as TREND/PLUNGE, for example 45/10.")
            for item in args.directions.split(","):
                trend, plunge = _trend_plunge(item, "--directions")
                directions.append(Direction(trend, plunge, args.angle_tolerance, args.bandwidth,
                                            args.vertical_bandwidth))
        for item in args.fan:
            parts = item.split("/")
            try:
                dip_direction, dip, count = float(parts[0]), float(parts[1]), int(parts[2])
                assert len(parts) == 3 and 0 <= dip_direction <= 360 and 0 <= dip <= 90 and 1 <= count <= 180
            except (ValueError, IndexError, AssertionError):
                raise UsageError(f"--fan {item!r}: write DIPDIR/DIP/N with a dip direction from 0 to 360, a dip "
                                 "from 0 to 90 and 1 to 180 directions, for example 0/0/18.") from None
            directions += fan(dip_direction, dip, count, None, args.bandwidth, args.vertical_bandwidth)
        chosen = args.omni or directions or args.downhole or args.volume
        dh_lag = args.downhole_lag or (length if length and length > 0 else lag)
        downhole = LagBins(dh_lag, args.lags) if (args.downhole or not chosen) else None
        volume = None
        if args.volume or not chosen:
            nx, ny, nz = args.volume_cells
            reach = bins.reach_m
            volume = VolumeGrid((reach / (nx + 0.5), reach / (ny + 0.5), reach / 2 / (nz + 0.5)), (nx, ny, nz))
        line_reach = max([b.reach_m for b in (bins, downhole) if b is not None])
        sets = Sets(omni=bins if (args.omni or not chosen) else None, directions=directions,
                    directional_bins=bins if directions else None, downhole=downhole, volume=volume,
                    pairs=args.pairs, max_distance_m=line_reach if volume is not None else None)
        folder.clear()
        step(names[1])
        index = PairIndex(xyz, hole, depth, max_distance_m=sets.plan().max_distance_m)
        step(names[2])
        acc = accumulate(xyz, values, sets, hole=hole, depth=depth, index=index, threads=args.threads,
                         dask=args.dask)
        acc.variance = float(np.nanvar(values, ddof=1))
        if args.measure == "pairwise-relative" and np.any(values == 0):
            # pairs of two zeros have no relative difference: count them (a pass on the zeros alone) to leave out
            zeros = np.where(values == 0, 0.0, np.nan)
            acc.zero_pairs = accumulate(xyz, zeros, sets, hole=hole, depth=depth, index=index,
                                        threads=args.threads).stats(0)[:, k.COUNT]
        step(names[3])
        table = variogram_table(acc, args.measure)
        binned = float(table["pairs"].sum())
        if volume is not None:
            binned += float(acc.volume(0)[1].sum())
        if binned == 0:
            raise TableError(f"{args.composites}: no pair of composites falls in any lag of these sets (reach "
                             f"{sets.plan().max_distance_m:.4g} m); check --lag and --lags against the spacing of the "
                             "composites.")
        _write_variograms(acc, acc, out, data.value, data.domain_text, args.measure)
    console.say(f"variograms of {args.value} ({args.measure}): {len(values)} composites, "
                f"{acc.accepted:,} pairs within {sets.plan().max_distance_m:.1f} m -> {out / 'variograms.csv'}")
    _left_out_summary(data, console)
    for name, part in table.groupby("set", sort=False):
        console.say(f"  {name}: {part['direction'].nunique() if name == 'directional' else 1} set(s), "
                    f"{len(part)} lag rows, {int(part['pairs'].sum()):,} pairs")
    if volume is not None:
        console.say(f"  volume: {2 * volume.half_counts[0] + 1} x {2 * volume.half_counts[1] + 1} x "
                    f"{2 * volume.half_counts[2] + 1} cells -> {out / 'volume.npz'}")
    folder.finish()
    return 0


def _transformed(values, kind: str, name: str, residuals: bool = False, weights=None):
    """``values`` under ``--transform`` (none, log or normal-score); bad usage when the log of a value
    at or below zero is asked for, with the count and the column."""
    import numpy as np

    from .variogram import normal_scores

    if kind == "log":
        below = int((values[np.isfinite(values)] <= 0).sum())
        if below:
            raise UsageError(f"--transform log: {below} value(s) of {name!r} are at or below zero, which have no "
                             "logarithm" + (" (residuals from a trend are never all positive: use --transform "
                                            "normal-score)" if residuals else "; use --transform normal-score, or "
                                            "replace those values (for example by half the detection limit)") + ".")
        return np.log(values)
    if kind == "normal-score":
        return normal_scores(values, weights)
    return values


def _trend_plunge(text, option):
    """``TREND/PLUNGE`` in degrees (trend 0 to 360, plunge -90 to 90), or bad usage."""
    try:
        trend, plunge = (float(v) for v in str(text).split("/"))
        if not (0 <= trend <= 360 and -90 <= plunge <= 90):
            raise ValueError
    except ValueError:
        raise UsageError(f"{option} {text!r}: write TREND/PLUNGE in degrees, trend 0 to 360 and plunge -90 to 90, "
                         "for example 45/10.") from None
    return trend, plunge


def _fixed_parts(args) -> dict:
    """FitOptions for what the user fixed (--nugget, --shape, --plane with --pitch or --major,
    --model); bad usage when they contradict each other or are incomplete."""
    import numpy as np

    from .orientation import axes_from_plane, vector_from_trend_plunge

    out = {}
    nugget, shape = getattr(args, "nugget", None), getattr(args, "shape", None)
    plane, pitch, major = getattr(args, "plane", None), getattr(args, "pitch", None), getattr(args, "major", None)
    path = getattr(args, "model", None)
    if nugget is not None:
        out["nugget"] = float(nugget)
    if shape:
        out["shapes"] = (shape,)
    if path:
        if plane or pitch is not None or major or shape:
            raise UsageError("--model fixes the axes and shapes of the model it reads: leave out --plane, --pitch, "
                             "--major and --shape, or leave out --model.")
        _, model = _read_model(path)
        out["axes"] = tuple(map(tuple, model.axes))
        out["shapes"] = (model.structures[0].shape,)
        if len({s.shape for s in model.structures}) > 1:
            raise UsageError(f"--model {path!r}: its structures have different shapes; the fit keeps one shape for "
                             "all structures.")
        out["structures"] = str(len(model.structures))
        return out
    if (pitch is not None or major) and not plane:
        raise UsageError("--pitch and --major need --plane DIPDIR/DIP: the plane of the major and semi-major axes.")
    if plane:
        if (pitch is None) == (major is None):
            raise UsageError("--plane fixes the axes with one of --pitch DEG or --major TREND/PLUNGE (not both).")
        dip_direction, dip = _trend_plunge(plane, "--plane")
        if not 0 <= dip <= 90:
            raise UsageError(f"--plane {plane!r}: the dip is 0 to 90 degrees.")
        if pitch is not None:
            axes = axes_from_plane(dip_direction, dip, float(pitch))
        else:
            along = vector_from_trend_plunge(*_trend_plunge(major, "--major"))
            normal = axes_from_plane(dip_direction, dip, 0.0)[2]
            off = math.degrees(math.asin(min(1.0, abs(float(along @ normal)))))
            if off > 10.0:
                raise UsageError(f"--major {major!r} lies {off:.1f} degrees off --plane {plane!r}: the major axis "
                                 "lies in the plane (within 10 degrees).")
            m = along - (along @ normal) * normal
            m /= np.linalg.norm(m)
            axes = np.stack([m, np.cross(normal, m), normal])
            if axes[2] @ np.cross(axes[0], axes[1]) < 0:
                axes[1] = -axes[1]
        out["axes"] = tuple(map(tuple, axes))
    return out


def _fit_and_check(xyz, values, hole, depth, length, args, out: Path, step, domain_text=None, lead=None,
                   detrend=None, ends=None, samples=None, effective_samples=None):
    """Fit the model, check the pattern, write model.json, pattern.json, fit_variograms.csv,
    variograms.csv and volume.npz. ``ends``, ``samples``, ``effective_samples``: for the nugget (see
    VariogramFitter.fit). ``lead``: warnings that open model.json (stationarity flags);
    ``detrend``: the trend whose residuals ``values`` are. Returns what the report needs."""
    import numpy as np
    import pandas as pd

    from .fit import FitOptions, VariogramFitter, cone_directions, model_json
    from .outputs import write_csv, write_json
    from .pattern import check_model, drill_pattern

    from .decluster import decluster

    declustering = decluster(xyz, values, hole, cell_m=getattr(args, "decluster_cell", None))
    raw = values
    values = _transformed(values, args.transform, args.value, residuals=bool(detrend), weights=declustering.weights)
    options = FitOptions(**{"lag_m": args.lag, "lags": args.lags, "structures": args.structures,
                            "bootstrap": args.bootstrap, "bootstrap_block_m": getattr(args, "bootstrap_block", None),
                            "seed": args.seed, "threads": args.threads, **_fixed_parts(args)})
    if args.transform != "none" or detrend:  # the samples' values are not those fitted: the composites' own nugget
        samples = effective_samples = None
    fitter = VariogramFitter(options).fit(xyz, values, hole, depth, composite_length=length, progress=step,
                                          ends=ends, samples=samples, effective_samples=effective_samples,
                                          weights=declustering.weights)
    result = fitter.result_
    model = result.model
    step("checking the drill pattern")
    pattern = drill_pattern(xyz, hole)
    ranges = [max(s.ranges_m[a] for s in model.structures) for a in range(3)]
    checks = check_model(pattern, xyz, model.axes, ranges, result.principal, min_pairs=options.min_pairs)
    pattern["model_axes"] = checks["axes"]
    pattern["warnings"] = checks["warnings"]
    fitted = model_json(result, args.value, domain_text)
    warnings = (list(lead or []) + [f"Drill pattern: {w}" for w in checks["warnings"]]
                + [f"Fit: {p}" for p in fitted["fit"]["problems"] + fitted["fit"]["warnings"]])
    # (every warning the console prints)
    data = {"schema": fitted.pop("schema"), "warnings": warnings, **fitted}
    data["transform"] = args.transform
    data["declustering"] = {"values": "residuals from the trend" if detrend else "composites",
                            **declustering.to_json()}
    if args.transform in ("log", "normal-score"):
        from .backtransform import back_transform

        # the model above is in the transform's units (as a simulation needs); kriging grades needs theirs
        data["model_in_grade_units"] = back_transform(model, args.transform, raw, declustering.weights)
    if detrend:
        data["detrend"] = {k: detrend[k] for k in ("kind", "terms", "coefficients", "centre", "unit_m", "r_squared")}
        data["detrend"]["note"] = "the model is of the residuals: value minus this trend"
    data["pattern"] = {"warnings": checks["warnings"],
                       "collar_spacing_m": pattern.get("collar_spacing_m", {}).get("median"),
                       "drill_lines": pattern.get("lines"), "hole_direction": pattern.get("hole_direction")}
    data["caution"] = CAUTION
    if getattr(args, "provenance", None):
        data["provenance"] = args.provenance
    write_json(data, out / "model.json")
    write_json(pattern, out / "pattern.json")
    rows = []
    for a, (name, ex) in enumerate(zip(("major", "semi_major", "minor"), result.principal)):
        d = np.nan_to_num(ex.distance)
        # the model over each lag's pairs' spread of directions (or over its cone where that is not known)
        cone = cone_directions(model.axes[a], options.principal_tolerance_deg)
        spread = ex.vectors if ex.vectors is not None else np.broadcast_to(cone, (len(d),) + cone.shape)
        in_cone = model.gamma((d[:, None, None] * spread).reshape(-1, 3)).reshape(len(d), -1).mean(axis=1)
        known = np.isfinite(ex.distance)
        rows.append(pd.DataFrame({"set": name, "distance": ex.distance, "pairs": ex.pairs, "gamma": ex.gamma,
                                  "model": np.where(known, model.gamma_along(model.axes[a], d), np.nan),
                                  "model_in_cone": np.where(known, in_cone, np.nan)}))
    dh = result.downhole
    rows.append(pd.DataFrame({"set": "downhole", "distance": dh.distance, "pairs": dh.pairs, "gamma": dh.gamma,
                              "model": np.nan, "model_in_cone": np.nan}))
    frame = pd.concat(rows, ignore_index=True)
    write_csv(frame, out / "fit_variograms.csv")
    _write_variograms(fitter.principal_, fitter.volume_, out, args.value, domain_text)
    volume = None
    grid = fitter.volume_.plan.sets.volume
    if grid is not None:
        gamma, counts = fitter.volume_.volume(0)
        volume = {"gamma": gamma, "pairs": counts, "cell_m": grid.cell_m, "half_counts": grid.half_counts}
    return {"model": data, "pattern": pattern, "fit_variograms": frame, "volume": volume}


def _write_variograms(line_acc, volume_acc, out: Path, variable: str, domain: str | None,
                      measure: str = "semivariogram"):
    """variograms.csv from the line sets of one pass and volume.npz from the volume of another; the
    volume names its variable, domain and measure, so that a scene never draws another's."""
    import numpy as np

    from .outputs import atomic_path, write_csv
    from .variogram import variogram_table

    write_csv(variogram_table(line_acc, measure), out / "variograms.csv")
    volume = volume_acc.plan.sets.volume
    if volume is None:
        return
    gamma, counts = volume_acc.volume(0, measure)
    with atomic_path(out / "volume.npz") as temporary:
        with open(temporary, "wb") as handle:
            np.savez_compressed(handle, gamma=gamma, pairs=counts, cell_m=np.asarray(volume.cell_m),
                                half_counts=np.asarray(volume.half_counts), measure=measure, variable=variable,
                                domain=domain or "")


def _model_summary(data: dict, out: Path, console: Console, printed=("Stationarity: ", "Tables: ")):
    """The model on the console; its warnings too, but those whose source (``printed``) the console
    showed already."""
    o = data["orientation"]
    if data.get("detrend"):
        console.say(f"model of the residuals from a {data['detrend']['kind']} trend (r squared "
                    f"{data['detrend']['r_squared']:.3f})")
    support = data.get("nugget_support") or {}
    sample = support.get("sample_support")
    console.say(f"model of {data['variable']}: variance {data['variance']:.4g}, nugget {data['nugget']:.4g} at "
                "composite support" + (f" ({sample:.4g} at sample support)" if sample is not None else "") +
                f", {data['pairs_used']:,} pairs along the principal axes -> {out / 'model.json'}")
    d = data.get("declustering") or {}
    if d.get("cell_m"):
        console.say(f"  declustered (cells of {d['cell_m']:.1f} m): mean {d['mean']:.4g}, variance "
                    f"{d['variance']:.4g}; naive: mean {d['naive_mean']:.4g}, variance {d['naive_variance']:.4g}")
    for s in data["structures"]:
        r = s["ranges"]
        console.say(f"  {s['shape']} sill {s['sill']:.4g}, ranges {r['major']:.1f} / {r['semi_major']:.1f} / "
                    f"{r['minor']:.1f} m (major / semi-major / minor)")
    console.say(f"  major trend {o['major']['trend']:.1f} plunge {o['major']['plunge']:.1f}; semi-major trend "
                f"{o['semi_major']['trend']:.1f} plunge {o['semi_major']['plunge']:.1f}; minor trend "
                f"{o['minor']['trend']:.1f} plunge {o['minor']['plunge']:.1f}")
    console.say(f"  plane dip direction {o['plane']['dip_direction']:.1f} dip {o['plane']['dip']:.1f}, pitch "
                f"{o['pitch']:.1f}")
    grade = data.get("model_in_grade_units")
    if grade:
        console.say(f"  back in grade units ({grade['method']}): nugget {grade['nugget']:.4g}; " + "; ".join(
            f"{s['shape']} sill {s['sill']:.4g}, ranges {s['ranges']['major']:.1f} / {s['ranges']['semi_major']:.1f} / "
            f"{s['ranges']['minor']:.1f} m" for s in grade["structures"]) + " (model.json: model_in_grade_units)")
    b = data.get("bootstrap")
    if b and "axis_angle_deg" in b:
        a = b["axis_angle_deg"]
        console.say(f"  bootstrap ({b['replicates'] - b['failed']} replicates): 95% of the replicate axes within "
                    f"{a['major']['p95']:.1f} / {a['semi_major']['p95']:.1f} / {a['minor']['p95']:.1f} degrees")
    for text in data["warnings"]:
        if not text.startswith(printed):
            console.say(f"  WARNING: {text}")


def _stationarity(xyz, values, hole, args, out: Path, rows, domain_text=None, labels=None, model_axes=None):
    """The stationarity checks (with swaths along ``model_axes`` when given); write
    stationarity.json (and trend.csv, from ``rows``, the composites used, with --detrend). Returns
    the data and, with --detrend, the residuals (else None)."""
    from .errors import TableError
    from .outputs import write_csv, write_json
    from .stationarity import detrend as fit_detrend
    from .stationarity import diagnose, domain_summary, trend_check

    try:
        report = diagnose(xyz, values, hole, threads=args.threads)
    except ValueError as exc:
        raise TableError(f"stationarity of {args.value!r}: {exc}.") from None
    data = {"schema": "drillaxis.stationarity/1", "variable": args.value, "domain": domain_text, **report}
    if model_axes is not None:
        data["model_axes_trend"] = trend_check(xyz, values, model_axes, threads=args.threads, coordinates=False)
    if labels is not None:
        data["checks"]["mixture"]["domains"] = domain_summary(*labels)
    residuals = None
    kind = getattr(args, "detrend", "none")
    if kind != "none":
        trend, fitted = fit_detrend(xyz, values, kind)
        residuals = values - fitted
        again = diagnose(xyz, residuals, hole, threads=args.threads)
        trend["residual_flags"] = again["flags"]
        trend["residual_warnings"] = again["warnings"]
        data["detrend"] = trend
        frame = rows[[c for c in ("hole", "from", "to", "x", "y", "z") if c in rows.columns]].copy()
        frame[args.value] = values
        frame["trend"] = fitted
        frame["residual"] = residuals
        write_csv(frame, out / "trend.csv")
    write_json(data, out / "stationarity.json")
    return data, residuals


def _stationarity_figures(data: dict, xyz, values, out: Path) -> dict:
    """Write stationarity_*.png; returns the PNG bytes by check (the report embeds the same)."""
    from viewer import figures

    from .outputs import atomic_path

    ch = data["checks"]
    variable = data["variable"]
    made = {"swaths": figures.swaths(ch["trend"], variable),
            "proportional_effect": figures.proportional_effect(ch["proportional_effect"], variable),
            "mixture": figures.mixture(ch["mixture"], values, variable),
            "sill": figures.sill(ch["sill"], variable),
            "halves": figures.halves(ch["halves"], xyz, variable)}
    for name, content in made.items():
        with atomic_path(out / f"stationarity_{name}.png") as temporary:
            temporary.write_bytes(content)
    return made


def _stationarity_summary(data: dict, out: Path, console: Console):
    flags = data["flags"]
    console.say(f"stationarity of {data['variable']}: {len(flags)} of {len(data['checks'])} checks flagged"
                + (f" ({', '.join(f.replace('_', ' ') for f in flags)})" if flags else "")
                + f" -> {out / 'stationarity.json'}")
    for text in data["warnings"]:
        console.say(f"  WARNING (stationarity): {text}")
    if data.get("detrend"):
        d = data["detrend"]
        left = d["residual_flags"]
        console.say(f"  detrended ({d['kind']}, r squared {d['r_squared']:.3f}) -> {out / 'trend.csv'}; checks "
                    f"flagged on the residuals: {', '.join(left) if left else 'none'}")


def _lead_warnings(data: dict) -> list:
    return [f"Stationarity: {text}" for text in data["warnings"]]


def _read_model(path):
    """model.json as a dictionary and as a Model; a usage error when it cannot be read or is not a
    model an estimate could use (no structure, a negative or missing sill or range, axes that are not
    orthonormal)."""
    import json

    from .model import Model

    try:
        data = json.loads(Path(path).read_text(encoding="utf-8"))
        if not isinstance(data, dict):
            raise ValueError("not a JSON object")
        model = Model.from_json(data)
    except (OSError, ValueError, KeyError, TypeError) as exc:
        raise UsageError(f"--model {str(path)!r}: cannot read a model from it ({exc}).") from None
    problems = model.problems() + ([] if model.structures else ["it has no structure"])
    if problems:
        raise UsageError(f"--model {str(path)!r}: not a model to draw: {'; '.join(problems)}.")
    fit = data.get("fit")
    lag = fit.get("lag_m") if isinstance(fit, dict) else None
    data["fit"] = {**(fit if isinstance(fit, dict) else {}),
                   "lag_m": lag if isinstance(lag, (int, float)) and math.isfinite(lag) and lag > 0 else None}
    return data, model


def cmd_stationarity(args, console: Console) -> int:
    import numpy as np
    import pandas as pd

    from .provenance import provenance

    folder = _out_dir(args)
    out = folder.path
    data = _read_composites(args.composites, args.value, args.domain)
    args.value = data.value
    labels = None
    if data.domain_column:
        labels = (pd.to_numeric(data.whole[data.value], errors="coerce").to_numpy(dtype=np.float64),
                  data.whole[data.domain_column])
    args.provenance = provenance({"composites": args.composites}, _options_of(args), {"composites": len(data.whole)})
    axes = _read_model(args.model)[1].axes if args.model else None
    folder.clear()
    report, _ = _stationarity(data.xyz, data.values, data.hole, args, out, data.rows, data.domain_text, labels,
                              model_axes=axes)
    _stationarity_figures(report, data.xyz, data.values, out)
    _stationarity_summary(report, out, console)
    _left_out_summary(data, console)
    folder.finish()
    return 0


def _options_of(args) -> dict:
    return {k: v for k, v in vars(args).items() if k not in ("provenance", "func")}


def cmd_fit(args, console: Console) -> int:
    folder = _out_dir(args)
    out = folder.path
    names = ["reading composites", "the nugget down the holes", "searching directions",
             "fanning about the major axis", "refining the axes on the variogram volume", "fitting the model",
             f"bootstrap of {args.bootstrap} replicates", "checking the drill pattern"]
    from .provenance import provenance

    with console.stages(names) as step:
        step(names[0])
        data = _read_composites(args.composites, args.value, args.domain)
        args.value = data.value
        values = data.values
        args.provenance = provenance({"composites": args.composites}, _options_of(args), {"composites": len(values)})
        folder.clear()
        trend = None
        if args.detrend != "none":
            from .stationarity import detrend

            trend, fitted = detrend(data.xyz, values, args.detrend)
            values = values - fitted
        try:
            fitted = _fit_and_check(data.xyz, values, data.hole, data.depth, data.length, args, out, step,
                                    data.domain_text, detrend=trend, ends=data.ends)
        except FitError as exc:  # say which data could not be fitted
            where = f" in {data.domain_text}" if data.domain_text else ""
            raise FitError(f"{args.composites}, {data.value}{where}: {exc}") from None
    _model_summary(fitted["model"], out, console)
    console.say(f"  caution: {CAUTION}")
    _left_out_summary(data, console)
    folder.finish()
    return 0


SCENE_DEFAULTS = dict(pairs_axis="major", pairs_direction=None, pairs_lag=None, max_pairs=400, fraction=1.0,
                      structures_apart=False, centre=None, collar_labels=False, size=(1600, 1200), units="",
                      show=False)


def _scene(xyz, values, hole, depth, hole_names, model: dict, volume, args, out: Path, value_name: str) -> dict:
    """Draw and write the scene (scene.png, scene_plan.png, scene_section.png, scene.html,
    scene.vtm); returns the PNG bytes by view and what was drawn."""
    import numpy as np

    from .model import AXIS_NAMES, Model
    from .orientation import trend_plunge
    from .outputs import atomic_path
    from .variogram import Direction, LagBins, Sets, bin_pairs

    o = {**SCENE_DEFAULTS, **{k: v for k, v in vars(args).items() if k in SCENE_DEFAULTS}}
    fitted = Model.from_json(model)
    pairs, chosen = None, None
    if o["pairs_axis"] != "none" or o["pairs_direction"]:
        if o["pairs_direction"]:
            trend, plunge = _trend_plunge(o["pairs_direction"], "--pairs-direction")
            from .orientation import vector_from_trend_plunge

            along = vector_from_trend_plunge(trend, plunge)
            label = f"direction {trend:g}/{plunge:g}"
        else:
            along = fitted.axes[AXIS_NAMES.index(o["pairs_axis"])]
            trend, plunge = trend_plunge(along)
            label = f"the {o['pairs_axis'].replace('_', '-')} axis"
        lag = float(model.get("fit", {}).get("lag_m") or max(np.ptp(xyz, axis=0)) / 30)
        lags = SCENE_LAGS
        sets = Sets(directions=[Direction(trend, plunge, 15.0)], directional_bins=LagBins(lag, lags))
        k = o["pairs_lag"] or int(min(lags, max(1, round(0.5 * fitted.range_along(along) / lag))))
        pairs = bin_pairs(xyz, np.nan_to_num(values, nan=float(np.nanmedian(values))), sets, "directional", k, 0,
                          max_pairs=o["max_pairs"], hole=hole, depth=depth)
        chosen = {"along": label, "lag_bin": k, "lag_m": k * lag, "angle_tolerance_deg": 15.0,
                  "pairs_in_bin": pairs["pairs_in_bin"], "pairs_drawn": int(len(pairs["i"]))}
    centre = o["centre"]
    if centre is not None:  # the ellipsoid is drawn among the data, not beside nothing
        reach = max(max(s.ranges_m) for s in fitted.structures)
        lo, hi = xyz.min(axis=0) - reach, xyz.max(axis=0) + reach
        if not np.all((np.asarray(centre) >= lo) & (np.asarray(centre) <= hi)):
            raise UsageError(f"--centre {','.join(f'{v:g}' for v in centre)}: outside the data (east {lo[0]:.0f} to "
                             f"{hi[0]:.0f}, north {lo[1]:.0f} to {hi[1]:.0f}, elevation {lo[2]:.0f} to {hi[2]:.0f} m, "
                             "within a range of the composites); give a point among them.")
    from viewer import scene as sc

    try:
        sc.prepare_offscreen(show=False)
    except RuntimeError as exc:
        raise UsageError(str(exc)) from None
    built = sc.build_scene(xyz, hole, depth, values, model, value_name, pairs, volume, centre=centre,
                           fraction=o["fraction"], per_structure=o["structures_apart"], hole_names=hole_names,
                           collar_labels=o["collar_labels"])
    images = {}
    title = f"{value_name}" + (f", {model['domain']}" if model.get("domain") else "")
    for view, name in (("minor", "scene.png"), ("plan", "scene_plan.png"), ("section", "scene_section.png")):
        with atomic_path(out / name, keep_extension=True) as temporary:
            sc.render(built, temporary, view, size=tuple(o["size"]), units=o["units"], title=title, model=fitted)
        images[view] = (out / name).read_bytes()
    with atomic_path(out / "scene.html", keep_extension=True) as temporary:
        sc.export_html(built, temporary, units=o["units"])
    sc.write_vtm(built, out / "scene.vtm")
    if o["show"]:
        import os

        if not (os.environ.get("DISPLAY") or os.environ.get("WAYLAND_DISPLAY") or sys.platform in ("win32", "darwin")):
            print("drillaxis view: no display here: --show skipped (the files are written)", file=sys.stderr)
        else:
            sc.show(built, units=o["units"])
    return {"images": images, "pairs": chosen}


def _scene_summary(drawn: dict, out: Path, console: Console):
    console.say(f"scene -> {out / 'scene.png'} (down the minor axis), scene_plan.png, scene_section.png, "
                "scene.html, scene.vtm")
    p = drawn.get("pairs")
    if p:
        console.say(f"  pairs: {p['pairs_drawn']} of the {p['pairs_in_bin']:,} in lag bin {p['lag_bin']} "
                    f"({p['lag_m']:.0f} m) along {p['along']}")


def cmd_view(args, console: Console) -> int:
    import zipfile

    import numpy as np

    folder = _out_dir(args)
    out = folder.path
    model, _ = _read_model(args.model)
    value = args.value or model.get("variable")
    domain = args.domain if args.domain is not None else model.get("domain")
    data = _read_composites(args.composites, value, domain, varying=False,
                            domain_option="--domain" if args.domain is not None else "the model's domain")
    volume = None
    stored = Path(args.model).with_name("volume.npz")
    if stored.exists():
        try:
            with np.load(stored) as found:
                volume = {key: found[key] for key in ("gamma", "pairs", "cell_m", "half_counts")}
                names = {key: str(found[key]) if key in found.files else None for key in ("variable", "domain",
                                                                                         "measure")}
        except (OSError, ValueError, KeyError, zipfile.BadZipFile) as exc:
            console.warn(f"{stored} cannot be read ({exc}); the scene is drawn without the variogram volume")
        else:
            wanted = {"variable": model.get("variable"), "domain": model.get("domain") or "",
                      "measure": "semivariogram"}
            if names != wanted:
                console.warn(f"{stored} is not the volume of this model (it holds {names['measure']} of "
                             f"{names['variable']!r} in {names['domain'] or 'all domains'!r}; the model is of "
                             f"{wanted['variable']!r} in {wanted['domain'] or 'all domains'!r}); the scene is drawn "
                             "without the variogram volume")
                volume = None
    folder.clear()
    drawn = _scene(data.xyz, data.values, data.hole, data.depth, data.hole_names, model, volume, args, out, data.value)
    _scene_summary(drawn, out, console)
    _left_out_summary(data, console)
    folder.finish()
    return 0


def _data_summary(tables, rejected, result, xyz, value) -> dict:
    import numpy as np

    intervals = tables.intervals
    sampled = intervals[np.isfinite(intervals[value].to_numpy(dtype=np.float64))] if value in intervals else intervals
    return {"holes": int(len(tables.collars)), "metres drilled": float(tables.collars["depth"].sum()),
            "survey rows": int(len(tables.surveys)), "interval rows": int(len(intervals)),
            f"metres sampled for {value}": float((sampled["to"] - sampled["from"]).sum()),
            "input rows left out (rejected.csv)": int(len(rejected)),
            "composites (all domains)": int(len(result.composites)),
            "composites used for the model": int(len(xyz))}


def _run_workflow(tables, rejected, result, args, out, step, value, domain, inputs):
    """From the composites of a run or the demo: stationarity, fit, pattern, report. ``domain``: None
    or ``COLUMN=VALUE``. Returns (stationarity data, fitted dict)."""
    import numpy as np

    from .provenance import provenance

    data = _composites_arrays(result.composites, value, domain)
    xyz, values, hole = data.xyz, data.values, data.hole
    rows_in = {role: len(getattr(tables, role)) for role in ("collars", "surveys", "intervals")}
    args.provenance = provenance(inputs, _options_of(args), rows_in)
    domain_text = data.domain_text
    step("checking stationarity")
    labels = None
    if data.domain_column:
        labels = (result.composites[value].to_numpy(dtype=np.float64), result.composites[data.domain_column])
    st, residuals = _stationarity(xyz, values, hole, args, out, data.rows, domain_text, labels)
    lead = [f"Tables: {text}" for text in tables.notices] + _lead_warnings(st)
    samples, effective = _samples_behind(tables, data)
    fitted = _fit_and_check(xyz, values if residuals is None else residuals, hole, data.depth, data.length, args, out,
                            step, domain_text, lead=lead, detrend=st.get("detrend"), ends=data.ends,
                            samples=samples, effective_samples=effective)
    step("writing the report")
    from .model import Model
    from .outputs import write_json
    from .stationarity import trend_check

    model = Model.from_json(fitted["model"])
    st["model_axes_trend"] = trend_check(xyz, values, model.axes, threads=args.threads, coordinates=False)
    write_json(st, out / "stationarity.json")
    made = _stationarity_figures(st, xyz, values, out)
    step("drawing the 3D scene")
    try:
        drawn = _scene(xyz, values, hole, data.depth, data.hole_names, fitted["model"], fitted["volume"], args, out,
                       value)
    except UsageError as exc:  # no off-screen rendering here: the rest of the run stands
        drawn = {"images": {}, "skipped": str(exc)}
    fitted["scene"] = drawn
    from viewer.report import write_report

    context = {"title": f"drillaxis report: {value}" + (f", {domain_text}" if domain_text else ""),
               "domain": domain_text, "data_summary": _data_summary(tables, rejected, result, xyz, value),
               "findings": tables.findings, "composite": result.summary, "composite_check": result.check,
               "stationarity": st, "values": values, "xyz": xyz, "hole": hole, "model": fitted["model"],
               "fit_variograms": fitted["fit_variograms"], "volume": fitted["volume"], "pattern": fitted["pattern"],
               "provenance": args.provenance, "caution": CAUTION, "figures": made, "scene": drawn,
               "warnings": fitted["model"]["warnings"]}
    write_report(out / "report.html", context)
    return st, fitted


RUN_STAGES = ["checking stationarity", "the nugget down the holes", "searching directions",
              "fanning about the major axis", "refining the axes on the variogram volume", "fitting the model",
              "bootstrap", "checking the drill pattern", "drawing the 3D scene", "writing the report"]


def _samples_behind(tables, data: "Composites"):
    """The samples of the value (and domain) behind the composites, numbered by the composites' holes,
    and each composite's effective number of samples; (None, None) when the composites do not say."""
    import numpy as np
    import pandas as pd

    from .nugget import Intervals

    column = f"{data.value}_effective_samples"
    if column not in data.rows.columns or data.value not in tables.intervals.columns:
        return None, None
    intervals = tables.intervals
    if data.domain_column and data.domain_column in intervals.columns:
        intervals = intervals[intervals[data.domain_column].astype(str).to_numpy() == data.domain_value]
    code = pd.Index(data.hole_names).get_indexer(intervals["hole"])
    keep = code >= 0
    samples = Intervals(code[keep], intervals["from"].to_numpy(dtype=np.float64)[keep],
                        intervals["to"].to_numpy(dtype=np.float64)[keep],
                        intervals[data.value].to_numpy(dtype=np.float64)[keep])
    return samples, data.rows[column].to_numpy(dtype=np.float64)


RUN_COMPOSITING = dict(residual="merge", merge_below=0.5, equal=False, min_coverage=0.5, density=None,
                       density_default=None, whole_run=False, bench=None, bench_base=0.0, cap=[])


def cmd_run(args, console: Console) -> int:
    folder = _out_dir(args)
    out = folder.path
    if args.domain is not None and "=" not in args.domain:
        raise UsageError(f"--domain {args.domain!r}: write COLUMN=VALUE, for example --domain domain=FRESH.")
    composite_args = argparse.Namespace(**{**vars(args), **RUN_COMPOSITING})
    _composite_options(composite_args)
    options = None

    def check(tables):  # the options against the tables, before anything is written
        nonlocal options
        args.value = _value_column(args.value, tables.value_columns, "the intervals table's value columns",
                                   categories=tables.category_columns)
        column = None
        if args.domain:
            column, wanted = _domain_column(args.domain, tables.category_columns)
            _domain_rows(tables.intervals, column, wanted, "the intervals table")  # a value it holds
            args.domain = f"{column}={wanted}"
        options = _resolve_composite_columns(_composite_options(composite_args, column), tables)

    names = ["reading and validating", "desurveying", "compositing", "writing composites", *RUN_STAGES]
    with console.stages(names) as step:
        step(names[0])
        tables, rejected = _checked_tables(composite_args, folder, console, check=check)
        result = _composite(tables, rejected, options, args, out, step)
        inputs = {"collars": args.collars, "surveys": args.surveys, "intervals": args.intervals}
        st, fitted = _run_workflow(tables, rejected, result, args, out, step, args.value, args.domain, inputs)
    _stationarity_summary(st, out, console)
    _findings_line(tables, out, console)
    _composite_summary(result, out, console)
    _model_summary(fitted["model"], out, console)
    _scene_or_skip(fitted["scene"], out, console)
    console.say(f"report -> {out / 'report.html'}")
    console.say(f"  caution: {CAUTION}")
    folder.finish()
    return 0


def _scene_or_skip(drawn: dict, out: Path, console: Console):
    if drawn.get("skipped"):
        console.say(f"  note: the 3D scene was not drawn (the rest of the run stands): {drawn['skipped']}")
    else:
        _scene_summary(drawn, out, console)


def _truth_against_fit(truth: dict, data: dict, console: Console, share_per_composite=None):
    """Axis errors (degrees) and range ratios of a fitted model.json against a truth model; the nugget
    against the truth's carried to composite support (its sample nugget times ``share_per_composite``,
    the mean of 1 / effective samples over the composites: the variance of a weighted mean of
    independent draws)."""
    import numpy as np

    from .model import AXIS_NAMES, Model

    t, f = Model.from_json(truth), Model.from_json(data)
    console.say("truth against fit (FRESH domain, au_gpt):")
    parts = []
    for a, name in enumerate(AXIS_NAMES):
        angle = float(np.degrees(np.arccos(min(1.0, abs(float(t.axes[a] @ f.axes[a]))))))
        ratio = f.effective_range(f.axes[a]) / t.effective_range(t.axes[a])
        parts.append(f"{name.replace('_', '-')} axis {angle:.1f} degrees off, range ratio {ratio:.2f}")
    console.say("  " + "; ".join(parts))
    if share_per_composite is not None:
        carried = t.nugget * share_per_composite
        console.say(f"  nugget at composite support: fitted {f.nugget:.3f}, truth {carried:.3f} (the truth's sample "
                    f"nugget {t.nugget:.3f} x {share_per_composite:.3f}, the mean of 1 / effective samples per "
                    "composite); at sample support: fitted "
                    + (f"{data['nugget_support']['sample_support']:.3f}"
                       if (data.get("nugget_support") or {}).get("sample_support") is not None else "-")
                    + f", truth {t.nugget:.3f}")
    else:
        console.say(f"  nugget share of the sill: fitted {f.nugget / f.sill:.2f}, truth {t.nugget / t.sill:.2f}")
    console.say("  ranges compared: the distance at which each model reaches 95% of its sill along each axis")


def cmd_demo(args, console: Console) -> int:
    from synthetic_holes import ProgramSpec, generate_program

    started = time.perf_counter()
    folder = _out_dir(args)
    out = folder.path
    folder.clear()
    names = ["generating the drill program", "reading and validating", "desurveying",
             "writing traces and samples", "compositing", "writing composites", *RUN_STAGES]
    with console.stages(names) as step:
        step(names[0])
        program = generate_program(ProgramSpec(), seed=args.seed)
        paths = program.write(out / "data")
        step(names[1])
        table_args = argparse.Namespace(
            collars=paths["collars"], surveys=paths["surveys"], intervals=paths["intervals"], column=[],
            dip_convention="negative-down", azimuth_offset=0.0, below_detection="half",
            missing_marker=[], missing_code=[], category=[], method="minimum-curvature", step=1.0,
            domain="domain", length=2.0, residual="merge", merge_below=0.5, equal=False, min_coverage=0.5,
            density="density", density_default=2.7, whole_run=False, bench=None, bench_base=0.0, cap=[],
        )
        tables, rejected = _checked_tables(table_args, folder, console)
        trace, traces, samples = _desurvey(tables, table_args, out, console, step)
        options = _resolve_composite_columns(_composite_options(table_args, "domain"), tables)
        result = _composite(tables, rejected, options, table_args, out, step, trace)
        fit_args = argparse.Namespace(value="au_gpt", transform="none", lag=None, lags=12, structures="auto",
                                      bootstrap=50, seed=0, threads=None, detrend="none", demo_seed=args.seed,
                                      units="g/t")
        st, fitted = _run_workflow(tables, rejected, result, fit_args, out, step, "au_gpt", "domain=FRESH", paths)
        data = fitted["model"]
    truth = program.truth
    console.say(f"drillaxis demo: the invented Tarn Hill program (seed {args.seed}) -> {out / 'data'}")
    _findings_summary(tables, console, out, limit=5)
    _desurvey_summary(trace, traces, samples, "minimum-curvature", out, console)
    _composite_summary(result, out, console)
    _stationarity_summary(st, out, console)
    model = truth["model"]
    o = model["orientation"]
    console.say("truth behind the grades (truth.json):")
    console.say(f"  nugget {model['nugget']:.2f}; " + "; ".join(
        f"{s['shape']} sill {s['sill']:.2f} ranges {s['ranges']['major']:.0f} / "
        f"{s['ranges']['semi_major']:.0f} / {s['ranges']['minor']:.0f} m" for s in model["structures"]))
    console.say(f"  major axis trend {o['major']['trend']:.1f} plunge {o['major']['plunge']:.1f}; "
                f"plane dip direction {o['plane']['dip_direction']:.1f} dip {o['plane']['dip']:.1f}; "
                f"pitch {o['pitch']:.1f}")
    _model_summary(data, out, console)
    fresh = result.composites[result.composites["domain"].astype(str) == "FRESH"]["au_gpt_effective_samples"]
    fresh = fresh[fresh > 0]
    _truth_against_fit(truth["model"], data, console, float((1.0 / fresh).mean()) if len(fresh) else None)
    _scene_or_skip(fitted["scene"], out, console)
    console.say(f"report -> {out / 'report.html'}")
    console.say(f"  caution: {CAUTION}")
    folder.finish()
    console.say(f"done in {time.perf_counter() - started:.1f} s")
    return 0


COMMANDS = {"check": cmd_check, "desurvey": cmd_desurvey, "composite": cmd_composite,
            "variogram": cmd_variogram, "stationarity": cmd_stationarity, "fit": cmd_fit, "view": cmd_view,
            "run": cmd_run, "demo": cmd_demo}


class Terminated(KeyboardInterrupt):
    """SIGTERM, raised where the program stands so that temporary files are removed on the way out."""


def _on_terminate(signum, frame):
    raise Terminated()


def main(argv=None) -> int:
    _safe_streams()
    if argv is None:  # the console script: a polite kill (SIGTERM) cleans up like Ctrl-C
        import signal
        import threading

        if threading.current_thread() is threading.main_thread():
            signal.signal(signal.SIGTERM, _on_terminate)
    parser = build_parser()
    args = parser.parse_args(argv)
    args.command_line = list(sys.argv[1:] if argv is None else argv)
    console = Console(getattr(args, "quiet", False))
    _quiet_libraries()
    try:
        return COMMANDS[args.command](args, console)
    except DrillaxisError as exc:
        print(f"drillaxis {args.command}: error: {exc}", file=sys.stderr)
        return exc.exit_code
    except MemoryError:
        print(f"drillaxis {args.command}: error: not enough memory for this job. Fewer lags, fewer volume cells, "
              "a shorter reach or a domain at a time need less.", file=sys.stderr)
        return 1
    except OSError as exc:  # the disk, not the data: full, read-only, gone
        where = f" {exc.filename}" if getattr(exc, "filename", None) else ""
        print(f"drillaxis {args.command}: error: cannot read or write{where}: {exc.strerror or exc}. Check the "
              "disk space and the permissions of the folders given.", file=sys.stderr)
        return 1
    except Terminated:
        print("drillaxis: terminated", file=sys.stderr)
        return 143
    except KeyboardInterrupt:
        print("drillaxis: interrupted", file=sys.stderr)
        return 130


def _quiet_libraries() -> None:
    """Library chatter that tells a geologist nothing: pandas' fragmentation hints, numba's
    performance notes, the notices of pyvista, VTK and trame about their own APIs."""
    import warnings

    warnings.filterwarnings("ignore", message=".*DataFrame is highly fragmented.*")
    warnings.filterwarnings("ignore", module=r"(pyvista|vtkmodules|trame\w*|wslink)(\..*)?$")
    warnings.filterwarnings("ignore", category=DeprecationWarning)
    warnings.filterwarnings("ignore", category=RuntimeWarning)  # numpy's overflow and invalid-value notes
    try:
        from numba.core.errors import NumbaPerformanceWarning

        warnings.filterwarnings("ignore", category=NumbaPerformanceWarning)
    except ImportError:  # pragma: no cover
        pass


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
