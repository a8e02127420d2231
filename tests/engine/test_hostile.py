"""Hostile input: a matrix of bad tables, bad files and bad option values run through the command line.

Every case must end with exit 0 (the input is usable), 1 (bad data) or 2 (bad usage), with a message
that names what is wrong, and never with a traceback (main() lets any unexpected exception through, so
a bug fails the case). Where a command succeeds on tables, every input row is either used or listed in
rejected.csv with its reason: used + rejected = input rows, and something was used.
"""

import errno
import json
import textwrap
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from engine.cli import main

from .conftest import GOOD_COLLARS, GOOD_INTERVALS, GOOD_SURVEYS

@dataclass
class Case:
    command: str
    options: list = field(default_factory=list)
    code: int = 0
    words: tuple = ()
    collars: object = GOOD_COLLARS
    surveys: object = GOOD_SURVEYS
    intervals: object = GOOD_INTERVALS
    composites: object = None  # a composites table (text) for the commands that read one
    stderr_words: tuple = ()  # must appear on stderr (warnings a piped stdout would hide)
    findings_words: tuple = ()  # must appear in findings.csv


def replace(text, old, new):
    assert old in text, old
    return text.replace(old, new)


def big_nul_file():
    """Intervals with a NUL byte past the first 64 KB: a damaged copy."""
    rows = "".join(f"B,{i * 0.001:.3f},{(i + 1) * 0.001:.3f},1.0,SCHIST\n" for i in range(4000))
    text = "hole,from,to,au,lith\nA,0,1,0.5,SCHIST\n" + rows
    data = text.encode()
    at = data.index(b"SCHIST", 70000)
    return data[:at + 1] + b"\x00" + data[at + 1:], data[:at].count(b"\n") + 1


NUL_DATA, NUL_LINE = big_nul_file()

LONG_ID = "H" * 10_000_000
WIDE = ("hole,from,to," + ",".join(f"el{i}" for i in range(500)) + "\n"
        + "".join(f"{h},{a},{b}," + ",".join(["1.5"] * 500) + "\n" for h, a, b in (("A", 0, 1), ("A", 1, 2.5),
                                                                                 ("A", 3, 5), ("B", 0, 2))))


def composites_text(values=None, n_holes=12, per_hole=15, domain=True, seed=1):
    rng = np.random.default_rng(seed)
    n = n_holes * per_hole
    frame = pd.DataFrame({
        "hole": np.repeat([f"H{i}" for i in range(n_holes)], per_hole),
        "from": np.tile(np.arange(per_hole) * 2.0, n_holes), "to": np.tile(np.arange(per_hole) * 2.0 + 2, n_holes),
        "x": np.repeat(rng.uniform(0, 150, n_holes), per_hole), "y": np.repeat(rng.uniform(0, 150, n_holes), per_hole),
        "z": -np.tile(np.arange(per_hole) * 2.0 + 1, n_holes),
        "au": rng.lognormal(size=n) if values is None else values(n),
    })
    if domain:
        frame["Zone"] = np.where(np.arange(n) % 3 == 0, "LODE", "WASTE")
    return frame.to_csv(index=False)


CONSTANT = composites_text(values=lambda n: 1.0 + np.random.default_rng(0).normal(0, 1e-16, n))
VARIED = composites_text()

# ---- the matrix: name -> case
CASES = {
    # files that cannot be read as tables
    "empty intervals": Case("check", intervals=b"", code=1, words=("empty",)),
    "empty collars": Case("check", collars=b"", code=1, words=("empty",)),
    "empty surveys": Case("check", surveys=b"", code=1, words=("empty",)),
    "header only": Case("check", intervals="hole,from,to,au\n", code=1, words=("no rows",)),
    "only blank lines": Case("check", intervals="\n\n\n", code=1, words=("empty",)),
    "binary garbage": Case("check", intervals=bytes(np.random.default_rng(0).integers(0, 256, 4000, dtype=np.uint8)),
                           code=1, words=("not a text table",)),
    "utf16": Case("check", intervals="hole,from,to,au\nA,0,1,0.5\n".encode("utf-16"), code=1, words=("UTF-16",)),
    "NUL past 64 KB": Case("desurvey", intervals=NUL_DATA, code=1, words=("NUL byte", f"line {NUL_LINE}:")),
    "unknown delimiter": Case("check", intervals="hole:from:to:au\nA:0:1:0.5\n", code=1, words=("separated",)),
    "duplicate headers": Case("check", intervals="hole,from,to,au,au\nA,0,1,0.5,0.6\n", code=1,
                              words=("appears twice",)),
    "too many fields": Case("check", intervals="hole,from,to,au\nA,0,1,0.5\nA,1,2,0.5,9,9\n", code=1,
                            words=("line 3",)),
    "unclosed quote": Case("check", intervals='hole,from,to,au\nA,0,1,0.5\n\nA,1,2,"0.5\nA,2,3,0.6\n', code=1,
                           words=("line 4", "never closed")),
    "truncated last row": Case("check", intervals="hole,from,to,au\nA,0,1,0.5\nA,1,2", code=1,
                               words=("truncated", "hole 'A'")),
    "table is a folder": Case("check", intervals="FOLDER", code=2, words=("is a folder",)),
    "table missing": Case("check", intervals="MISSING", code=2, words=("does not exist",)),
    "corrupt parquet": Case("check", intervals="PARQUET", code=1, words=("Parquet",)),
    # columns
    "no hole column in two tables": Case("check", collars="id,x,y,z,depth\nA,0,0,0,30\nB,1,1,0,20\n",
                                         surveys="id,depth,azimuth,dip\nA,0,0,-90\n", code=1,
                                         words=("collars", "surveys", "no hole column")),
    "two candidate x columns": Case("check", collars="hole,x,east,y,z,depth\nA,1,1,2,3,30\nB,1,1,2,3,20\n",
                                    code=1, words=("more than one column",)),
    "inclination, no dip": Case("check", surveys="hole,depth,azimuth,inclination\nA,0,90,30\n", code=1,
                                words=("inclination",)),
    "reserved column name": Case("check", intervals="hole,from,to,_line\nA,0,1,3\n", code=1,
                                 words=("drillaxis uses",)),
    "role named twice": Case("check", options=["--column", "hole=nope"], code=1, words=("nope",)),
    "column option without =": Case("check", options=["--column", "hole"], code=2, words=("ROLE=NAME",)),
    "unknown role": Case("check", options=["--column", "colour=red"], code=2, words=("unknown role",)),
    "old role name at": Case("check", options=["--column", "at=depth"], code=0, stderr_words=("survey_depth",)),
    # cells and rows
    "text in coordinates": Case("check", collars=replace(GOOD_COLLARS, "A,100,", "A,1OO,"), code=1,
                                words=("not a number",)),
    "infinite grade": Case("check", intervals=GOOD_INTERVALS + "B,2,3,1e999,SCHIST\n", code=1,
                           words=("finite",)),
    "1e308 collar": Case("check", collars=replace(GOOD_COLLARS, "A,100,", "A,1e308,"), code=1,
                         words=("plausible coordinate",)),
    "1e99 grade is warned about": Case("check", intervals=GOOD_INTERVALS + "B,2,3,1e99,SCHIST\n", code=0,
                                       words=("larger than 1e+09",)),
    "1e99 grade composites with relative metal check": Case(
        "composite", intervals=GOOD_INTERVALS + "B,2,3,1e99,SCHIST\n", options=["--length", "1"], code=0,
        words=("relative",)),
    "below detection": Case("check", intervals=replace(GOOD_INTERVALS, "A,0,1,0.5", "A,0,1,<0.01"), code=0,
                            words=("below the detection limit",)),
    "missing marker unknown": Case("check", intervals=replace(GOOD_INTERVALS, "A,0,1,0.5", "A,0,1,NS"), code=0,
                                   words=("read as a category", "--missing-marker")),
    "text among many values": Case("check", intervals=GOOD_INTERVALS + "B,2,3,1,SCHIST\nB,3,4,1,SCHIST\n"
                                   "B,4,5,1,SCHIST\nB,5,6,x,SCHIST\nB,6,7,1,SCHIST\nB,7,8,2,SCHIST\n", code=1,
                                   words=("'x' is not a number",)),
    "missing marker named": Case("check", intervals=replace(GOOD_INTERVALS, "A,0,1,0.5", "A,0,1,NS"),
                                 options=["--missing-marker", "NS"], code=0),
    "missing code": Case("check", intervals=replace(GOOD_INTERVALS, "A,0,1,0.5", "A,0,1,-99"),
                         options=["--missing-code", "-99"], code=0),
    "duplicate collar": Case("check", collars=GOOD_COLLARS + "A,1,1,1,10\n", code=1, words=("more than one",)),
    "from not above to": Case("check", intervals=GOOD_INTERVALS + "B,3,2,1,SCHIST\n", code=1,
                              words=("from < to",)),
    "interval past the end": Case("check", intervals=GOOD_INTERVALS + "B,19,25,1,SCHIST\n", code=1,
                                  words=("past the end",)),
    "overlapping intervals": Case("check", intervals=GOOD_INTERVALS + "A,0.5,0.8,1,SCHIST\n", code=1,
                                  words=("overlaps",)),
    "interval without collar": Case("check", intervals=GOOD_INTERVALS + "Q,0,1,1,SCHIST\n", code=1,
                                    words=("no collar row",)),
    "survey without collar": Case("check", surveys=GOOD_SURVEYS + "Q,0,0,-90\n", code=1, words=("no collar",)),
    "negative survey depth": Case("check", surveys=GOOD_SURVEYS + "B,-5,0,-90\n", code=1, words=("negative",)),
    "blank hole id": Case("check", intervals=GOOD_INTERVALS + " ,0,1,1,SCHIST\n", code=1, words=("empty",)),
    "azimuth 360": Case("check", surveys=replace(GOOD_SURVEYS, "B,0,0,-90", "B,0,360,-90"), code=0),
    "azimuth 361": Case("check", surveys=replace(GOOD_SURVEYS, "B,0,0,-90", "B,0,361,-90"), code=1,
                        words=("[0, 360]",)),
    "dip out of range": Case("check", surveys=replace(GOOD_SURVEYS, "B,0,0,-90", "B,0,0,-95"), code=1,
                             words=("[-90, 90]",)),
    "dips positive down": Case("desurvey", surveys="hole,depth,azimuth,dip\nA,0,90,60\nA,25,92,59\nB,0,0,90\n",
                               code=0, stderr_words=("--dip-convention positive-down", "2 of 2 holes")),
    "one rising hole": Case("check", surveys=replace(GOOD_SURVEYS, "B,0,0,-90", "B,0,0,45"), code=0,
                            words=("starts upward",)),
    "tiny survey step": Case("check", surveys=GOOD_SURVEYS + "A,25.000000001,140,-10\n", code=0,
                             words=("only 1e-09 m above it",)),
    "ten megabyte hole id": Case("check", intervals=GOOD_INTERVALS + f"{LONG_ID},0,1,1,SCHIST\n", code=1,
                                 words=("…",)),
    "decimal comma everywhere": Case(
        "desurvey", collars="hole;x;y;z;depth\nA;100,5;200;50;30\nB;110;200;50;20\n",
        surveys="hole;depth;azimuth;dip\nA;0;90;-60\nA;25;92,5;-59\nB;0;0;-90\n",
        intervals="hole;from;to;au;lith\nA;0;1;0,5;SCHIST\nA;1;2,5;1,25;SCHIST\nA;3;5;0,75;VEIN\nB;0;2;2,0;SCHIST\n",
        code=0),
    "BOM and CRLF": Case("desurvey", intervals="\ufeff" + GOOD_INTERVALS.replace("\n", "\r\n"), code=0),
    "unicode ids": Case("desurvey", collars=GOOD_COLLARS.replace("A,", "孔-Ä,"),
                        surveys=GOOD_SURVEYS.replace("A,", "孔-Ä,"),
                        intervals=GOOD_INTERVALS.replace("A,", "孔-Ä,"), code=0),
    "500 value columns": Case("composite", intervals=WIDE, options=["--length", "1"], code=0),
    # rows that are left out, or not
    "errors without skip": Case("desurvey", intervals=GOOD_INTERVALS + "B,1,3,abc,SCHIST\n", code=1,
                                words=("--skip-bad-rows",)),
    "errors skipped": Case("desurvey", intervals=GOOD_INTERVALS + "B,1,3,abc,SCHIST\n",
                           options=["--skip-bad-rows"], code=0),
    "every collar rejected": Case("desurvey", collars=GOOD_COLLARS.replace(",30\n", ",-30\n").replace(",20\n", ",0\n"),
                                  options=["--skip-bad-rows"], code=1, words=("no collar row is left",)),
    "every interval rejected": Case("composite", intervals="hole,from,to,au\nA,1,0,0.5\nB,2,1,0.7\n",
                                    options=["--skip-bad-rows", "--length", "1"], code=1,
                                    words=("no interval row is left",)),
    "all surveys of a hole rejected, no collar angles": Case(
        "composite", surveys=replace(replace(GOOD_SURVEYS, "A,0,90,-60", "A,0,east,-60"), "A,25,92,-59", "A,25,92,x"),
        options=["--skip-bad-rows", "--length", "1"], code=0),
    "all surveys of a hole rejected, collar angles": Case(
        "desurvey", collars="hole,x,y,z,depth,azimuth,dip\nA,100,200,50,30,90,-60\nB,110,200,50,20,0,-90\n",
        surveys=replace(replace(GOOD_SURVEYS, "A,0,90,-60", "A,0,east,-60"), "A,25,92,-59", "A,25,92,x"),
        options=["--skip-bad-rows"], code=0),
    # compositing options
    "composite domain no such column": Case("composite", options=["--length", "1", "--domain", "NoSuchColumn"],
                                            code=2, words=("no such category column", "lith")),
    "composite domain other case": Case("composite", options=["--length", "1", "--domain", "LITH"], code=0),
    "composite domain column with =": Case(
        "composite", intervals=GOOD_INTERVALS.replace("lith", "rock=type"), options=["--length", "1", "--domain",
                                                                                     "rock=type"], code=0),
    "cap with = in the column": Case("composite", intervals=GOOD_INTERVALS.replace("au", "au=ppm"),
                                     options=["--length", "1", "--cap", "au=ppm=1"], code=0),
    "cap not a number": Case("composite", options=["--length", "1", "--cap", "au=lots"], code=2,
                             words=("COLUMN=VALUE",)),
    "cap unknown column": Case("composite", options=["--length", "1", "--cap", "cu=3"], code=2,
                               words=("no such value column",)),
    "density unknown column": Case("composite", options=["--length", "1", "--density", "sg"], code=2,
                                   words=("no such value column",)),
    "no composite mode": Case("composite", code=2, words=("--length",)),
    "length 1e-9": Case("composite", options=["--length", "1e-9"], code=2, words=("composites",)),
    "bench 1e-9": Case("composite", options=["--bench", "1e-9"], code=2, words=("composites",)),
    "trace step 1e-9": Case("desurvey", options=["--step", "1e-9"], code=2, words=("--step",)),
    # composites files
    "constant values": Case("variogram", composites=CONSTANT, options=["--value", "au"], code=1,
                            words=("do not vary",)),
    "constant values fit": Case("fit", composites=CONSTANT, options=["--value", "au"], code=1,
                                words=("do not vary",)),
    "constant values stationarity": Case("stationarity", composites=CONSTANT, options=["--value", "au"], code=1,
                                         words=("do not vary",)),
    "value column absent": Case("variogram", composites=VARIED, options=["--value", "cu"], code=2,
                                words=("'cu'", "au")),
    "value column absent in fit": Case("fit", composites=VARIED, options=["--value", "cu"], code=2,
                                       words=("'cu'",)),
    "value column other case": Case("variogram", composites=VARIED, options=["--value", "AU", "--omni"], code=0),
    "domain value absent": Case("variogram", composites=VARIED, options=["--value", "au", "--domain", "Zone=ORE"],
                                code=2, words=("LODE", "WASTE")),
    "domain value other case": Case("variogram", composites=VARIED, options=["--value", "au", "--domain",
                                                                             "Zone=lode"], code=2,
                                    words=("did you mean 'LODE'",)),
    "domain column other case": Case("variogram", composites=VARIED, options=["--value", "au", "--domain",
                                                                              "zone=LODE", "--omni"], code=0),
    "domain without =": Case("variogram", composites=VARIED, options=["--value", "au", "--domain", "Zone"],
                             code=2, words=("COLUMN=VALUE",)),
    "domain column absent": Case("variogram", composites=VARIED, options=["--value", "au", "--domain", "Rock=A"],
                                 code=2, words=("no column 'Rock'",)),
    "text values": Case("variogram", composites=VARIED, options=["--value", "Zone"], code=1,
                        words=("must hold numbers",)),
    "not a composites table": Case("variogram", composites="a,b\n1,2\n", options=["--value", "a"], code=1,
                                   words=("not a composites table",)),
    "one composite": Case("variogram", composites="hole,x,y,z,au\nA,0,0,0,1\n", options=["--value", "au"], code=1,
                          words=("at least 2",)),
    "no positions": Case("variogram", composites="hole,x,y,z,au\nA,,0,0,1\nB,,1,0,2\n", options=["--value", "au"],
                         code=1, words=("no composite",)),
    "log of zeros": Case("variogram", composites=composites_text(values=lambda n: np.arange(n) % 4 * 1.0),
                         options=["--value", "au", "--transform", "log"], code=2, words=("at or below zero",)),
    "directions out of range": Case("variogram", composites=VARIED, options=["--value", "au", "--directions",
                                                                            "400/100"], code=2,
                                    words=("TREND/PLUNGE",)),
    "directions not numbers": Case("variogram", composites=VARIED, options=["--value", "au", "--directions", "north"],
                                   code=2, words=("TREND/PLUNGE",)),
    "fan with no directions": Case("variogram", composites=VARIED, options=["--value", "au", "--fan", "0/0/0"],
                                   code=2, words=("DIPDIR/DIP/N",)),
    "fan dip out of range": Case("variogram", composites=VARIED, options=["--value", "au", "--fan", "0/100/3"],
                                 code=2, words=("DIPDIR/DIP/N",)),
    "dask bogus": Case("variogram", composites=VARIED, options=["--value", "au", "--omni", "--dask", "bogus"],
                       code=2, words=("--dask",)),
    "dask no workers": Case("variogram", composites=VARIED, options=["--value", "au", "--omni", "--dask", "local:0"],
                            code=2, words=("--dask",)),
    "model unreadable": Case("view", composites=VARIED, options=["--model", "MODEL"], code=2,
                             words=("cannot read a model",)),
    "model without structures": Case("view", composites=VARIED, options=["--model", "MODEL:no structure"], code=2,
                                     words=("no structure",)),
    "model with zero axes": Case("view", composites=VARIED, options=["--model", "MODEL:zero axes"], code=2,
                                 words=("orthonormal",)),
    "model with a negative range": Case("view", composites=VARIED, options=["--model", "MODEL:negative range"],
                                        code=2, words=("above zero",)),
    "centre far from the data": Case("view", composites=VARIED, options=["--model", "MODEL:good", "--centre",
                                                                         "1e30,0,0"], code=2,
                                     words=("outside the data",)),
    # names that drillaxis writes, and inputs it would overwrite
    "interval column x": Case("composite", intervals=GOOD_INTERVALS.replace("au,lith", "au,x").replace(
        "SCHIST", "1").replace("VEIN", "2"), options=["--length", "1"], code=0, words=("1 warning",),
        findings_words=("'x' is left out",)),
    "interval column length": Case("desurvey", intervals=GOOD_INTERVALS.replace("lith", "length").replace(
        "SCHIST", "1").replace("VEIN", "2"), code=0, findings_words=("'length' is left out",)),
    "interval column au_sampled": Case("composite", intervals=GOOD_INTERVALS.replace("lith", "au_sampled").replace(
        "SCHIST", "1").replace("VEIN", "2"), options=["--length", "1"], code=0,
        findings_words=("'au_sampled' is left out",)),
    "input named like an output": Case("desurvey", intervals="INSIDE:samples.csv", code=2,
                                       words=("would be overwritten",)),
    # compositing options that were taken silently
    "cap given twice": Case("composite", options=["--length", "1", "--cap", "au=5", "--cap", "AU=50"], code=2,
                            words=("capped twice",)),
    "bench base beyond coordinates": Case("composite", options=["--bench", "5", "--bench-base", "1e300"], code=2,
                                          words=("--bench-base",)),
    "length with whole run": Case("composite", options=["--length", "2", "--whole-run"], code=2,
                                  words=("ways of compositing",)),
    "blank domain cells": Case("composite", intervals=GOOD_INTERVALS.replace("A,3,5,0.75,VEIN", "A,3,5,0.75,"),
                               options=["--length", "1", "--domain", "lith"], code=0,
                               words=("no value in the domain column",)),
    "column read as a category, asked as a cap": Case(
        "composite", intervals=replace(GOOD_INTERVALS, "A,0,1,0.5", "A,0,1,NS"), options=["--length", "1", "--cap",
                                                                                          "au=3"],
        code=2, words=("read as a category",)),
    "category option naming no column": Case("check", options=["--category", "nosuch"], code=2,
                                             words=("--category",)),
    "category option naming a role": Case("check", options=["--category", "from"], code=2, words=("--category",)),
    "detection limits with decimal commas": Case(
        "check", intervals="hole;from;to;au\nA;0;1;<0,01\nA;1;2,5;>10,5\nB;0;2;2,0\n", code=0,
        words=("below the detection limit", "above the upper detection limit")),
    "collar angles far from the surveys": Case(
        "check", collars="hole,x,y,z,depth,azimuth,dip\nA,100,200,50,30,300,-60\nB,110,200,50,20,0,-90\n",
        code=0, words=("degrees away from the first survey row", "the survey rows are used")),
    # composites files
    "numeric domain codes stay text": Case("variogram", composites=VARIED.replace("LODE", "02").replace(
        "WASTE", "01"), options=["--value", "au", "--domain", "Zone=02", "--omni"], code=0),
    "two columns differing in case": Case("variogram", composites=VARIED.replace("hole,from,to,x,y,z,au,Zone",
                                                                                 "hole,from,to,x,y,z,au,AU"),
                                          options=["--value", "Au"], code=2, words=("several columns",)),
    "constant indicator": Case("variogram", composites=VARIED, options=["--value", "au", "--indicator", "1e9"],
                               code=1, words=("do not vary",)),
    "no pair in any lag": Case("variogram", composites=VARIED, options=["--value", "au", "--lag", "1e6", "--omni"],
                               code=1, words=("no pair",)),
    "empty directions": Case("variogram", composites=VARIED, options=["--value", "au", "--directions", ""], code=2,
                             words=("at least one direction",)),
    "dask with too many workers": Case("variogram", composites=VARIED, options=["--value", "au", "--omni", "--dask",
                                                                                "local:100000"], code=2,
                                       words=("1 to 64",)),
    "out is empty": Case("check", options=["--out", ""], code=2, words=("--out",)),
}

# ---- option values refused where they are parsed: exit 2, naming the option and its range
BAD_OPTIONS = {
    "threads 0": ("variogram", ["--threads", "0"], "--threads"),
    "threads -1": ("fit", ["--threads", "-1"], "--threads"),
    "threads text": ("stationarity", ["--threads", "many"], "--threads"),
    "angle tolerance 0": ("variogram", ["--angle-tolerance", "0"], "--angle-tolerance"),
    "angle tolerance 200": ("variogram", ["--angle-tolerance", "200"], "--angle-tolerance"),
    "angle tolerance nan": ("variogram", ["--angle-tolerance", "nan"], "--angle-tolerance"),
    "volume cells 0": ("variogram", ["--volume-cells", "0", "0", "0"], "--volume-cells"),
    "volume cells -1": ("variogram", ["--volume-cells", "-1", "5", "5"], "--volume-cells"),
    "volume cells huge": ("variogram", ["--volume-cells", "1000", "5", "5"], "--volume-cells"),
    "indicator nan": ("variogram", ["--indicator", "nan"], "--indicator"),
    "indicator inf": ("variogram", ["--indicator", "inf"], "--indicator"),
    "lag 0": ("variogram", ["--lag", "0"], "--lag"),
    "lag negative": ("fit", ["--lag", "-5"], "--lag"),
    "lag inf": ("fit", ["--lag", "inf"], "--lag"),
    "lags 0": ("variogram", ["--lags", "0"], "--lags"),
    "lags 2 in fit": ("fit", ["--lags", "2"], "--lags"),
    "lags huge": ("variogram", ["--lags", "100000"], "--lags"),
    "lag tolerance negative": ("variogram", ["--lag-tolerance", "-1"], "--lag-tolerance"),
    "bandwidth 0": ("variogram", ["--bandwidth", "0"], "--bandwidth"),
    "downhole lag 0": ("variogram", ["--downhole-lag", "0"], "--downhole-lag"),
    "bootstrap -1": ("fit", ["--bootstrap", "-1"], "--bootstrap"),
    "bootstrap block -1": ("fit", ["--bootstrap-block", "-1"], "--bootstrap-block"),
    "decluster cell -1": ("fit", ["--decluster-cell", "-1"], "--decluster-cell"),
    "decluster cell nan": ("run", ["--decluster-cell", "nan"], "--decluster-cell"),
    "seed -1": ("fit", ["--seed", "-1"], "--seed"),
    "size 0 0": ("view", ["--size", "0", "0"], "--size"),
    "size huge": ("view", ["--size", "100", "100000"], "--size"),
    "fraction -1": ("view", ["--fraction", "-1"], "--fraction"),
    "fraction nan": ("view", ["--fraction", "nan"], "--fraction"),
    "max pairs -1": ("view", ["--max-pairs", "-1"], "--max-pairs"),
    "pairs lag 0": ("view", ["--pairs-lag", "0"], "--pairs-lag"),
    "pairs lag 50": ("view", ["--pairs-lag", "50"], "--pairs-lag"),
    "centre not a point": ("view", ["--centre", "a,b"], "--centre"),
    "centre two numbers": ("view", ["--centre", "1,2"], "--centre"),
    "length 0": ("composite", ["--length", "0"], "--length"),
    "length -2": ("composite", ["--length", "-2"], "--length"),
    "length nan": ("composite", ["--length", "nan"], "--length"),
    "step 0": ("desurvey", ["--step", "0"], "--step"),
    "azimuth offset nan": ("desurvey", ["--azimuth-offset", "nan"], "--azimuth-offset"),
    "azimuth offset 1000": ("desurvey", ["--azimuth-offset", "1000"], "--azimuth-offset"),
    "min coverage 2": ("composite", ["--min-coverage", "2"], "--min-coverage"),
    "merge below 0": ("composite", ["--merge-below", "0"], "--merge-below"),
    "density default 0": ("composite", ["--density-default", "0"], "--density-default"),
    "bench 0": ("composite", ["--bench", "0"], "--bench"),
    "missing code nan": ("check", ["--missing-code", "nan"], "--missing-code"),
    "demo seed -1": ("demo", ["--seed", "-1"], "--seed"),
    "run lags 1": ("run", ["--lags", "1"], "--lags"),
    "run length 0": ("run", ["--length", "0"], "--length"),
}


GOOD_MODEL = {"schema": "drillaxis.model/1", "variable": "au", "domain": None, "nugget": 0.1,
              "structures": [{"shape": "spherical", "sill": 0.9, "ranges": {"major": 60.0, "semi_major": 40.0,
                                                                             "minor": 10.0}}],
              "axes": {"major": [1.0, 0.0, 0.0], "semi_major": [0.0, 1.0, 0.0], "minor": [0.0, 0.0, 1.0]},
              "fit": {"lag_m": "ten"}}
MODELS = {
    "good": GOOD_MODEL,
    "no structure": {**GOOD_MODEL, "structures": []},
    "zero axes": {**GOOD_MODEL, "axes": {n: [0.0, 0.0, 0.0] for n in ("major", "semi_major", "minor")}},
    "negative range": {**GOOD_MODEL, "structures": [{"shape": "spherical", "sill": 0.9, "ranges": {
        "major": 60.0, "semi_major": -40.0, "minor": 10.0}}]},
}


def write(tmp_path, name, content):
    path = tmp_path / f"{name}.csv"
    if isinstance(content, str) and content.startswith("INSIDE:"):  # inside the output folder
        path = tmp_path / "out" / content.split(":", 1)[1]
        path.parent.mkdir(parents=True, exist_ok=True)
        path.write_text(GOOD_INTERVALS, encoding="utf-8")
        return path
    if content == "FOLDER":
        path.mkdir()
    elif content == "MISSING":
        return tmp_path / f"{name}_missing.csv"
    elif content == "PARQUET":
        path = tmp_path / f"{name}.parquet"
        path.write_bytes(b"PAR1 not really parquet PAR1")
    elif isinstance(content, bytes):
        path.write_bytes(content)
    else:
        path.write_text(textwrap.dedent(content), encoding="utf-8", newline="")
    return path


def run(argv, capsys):
    try:
        code = main([str(a) for a in argv])
    except SystemExit as exc:  # argparse's own exit on bad usage
        code = exc.code
    captured = capsys.readouterr()
    return code, captured.out, captured.err


def conservation(case: Case, out: Path):
    """used + rejected = input rows, and something was used."""
    rejected = pd.read_csv(out / "rejected.csv")
    if case.command == "desurvey":
        used = len(pd.read_csv(out / "samples.csv"))
    else:
        used = json.loads((out / "composite_summary.json").read_text())["samples"]
    left = int((rejected["table"] == "intervals").sum())
    text = case.intervals if isinstance(case.intervals, str) else case.intervals.decode("utf-8", "replace")
    rows = sum(1 for line in text.splitlines()[1:] if line.strip())
    assert used > 0 and used + left == rows, (used, left, rows)


@pytest.mark.parametrize("name", list(CASES))
def test_hostile_case(name, tmp_path, capsys):
    case = CASES[name]
    out = tmp_path / "out"
    if case.composites is not None:
        argv = [case.command, "--composites", write(tmp_path, "composites", case.composites)]
        if case.command == "view":
            model = tmp_path / "model.json"
            options = []
            for option in case.options:
                if option == "MODEL":
                    model.write_text('{"schema": "drillaxis.model/1", "nugget": ')
                    option = str(model)
                elif option.startswith("MODEL:"):
                    model.write_text(json.dumps(MODELS[option.split(":", 1)[1]]))
                    option = str(model)
                options.append(option)
            argv += ["--value", "au", "--size", "320", "240", *options]
        else:
            argv += case.options
    else:
        argv = [case.command, "--collars", write(tmp_path, "collars", case.collars),
                "--surveys", write(tmp_path, "surveys", case.surveys),
                "--intervals", write(tmp_path, "intervals", case.intervals), *case.options]
    if "--out" not in argv:
        argv += ["--out", out]
    code, stdout, stderr = run(argv, capsys)
    assert code == case.code, (stdout[-2000:], stderr[-2000:])
    assert "Traceback" not in stderr
    assert len(stdout) + len(stderr) < 100_000  # nothing of megabytes echoed
    for words in case.words:
        assert words in stdout + stderr, (words, stdout[-2000:], stderr[-2000:])
    for words in case.stderr_words:
        assert words in stderr, (words, stderr[-2000:])
    if case.findings_words:
        problems = " ".join(pd.read_csv(out / "findings.csv")["problem"].astype(str))
        for words in case.findings_words:
            assert words in problems, (words, problems[-2000:])
    if "500 value columns" in name:
        assert "Warning" not in stderr
    if code == 0 and case.command in ("desurvey", "composite"):
        conservation(case, out)
    if code == 0:
        assert (out / "manifest.json").exists()


@pytest.mark.parametrize("name", list(BAD_OPTIONS))
def test_bad_option_value(name, tmp_path, capsys):
    command, options, option = BAD_OPTIONS[name]
    needs = {"check": ["--collars", "c", "--surveys", "s", "--intervals", "i"],
             "desurvey": ["--collars", "c", "--surveys", "s", "--intervals", "i"],
             "composite": ["--collars", "c", "--surveys", "s", "--intervals", "i"],
             "run": ["--collars", "c", "--surveys", "s", "--intervals", "i", "--value", "au"],
             "variogram": ["--composites", "c", "--value", "au"], "fit": ["--composites", "c", "--value", "au"],
             "stationarity": ["--composites", "c", "--value", "au"], "view": ["--composites", "c", "--model", "m"],
             "demo": []}[command]
    code, stdout, stderr = run([command, *needs, *options, "--out", tmp_path / "o"], capsys)
    assert code == 2 and option in stderr and "Traceback" not in stderr, stderr
    assert "give" in stderr or "write" in stderr  # the allowed range or form is stated
    assert not (tmp_path / "o").exists()  # refused before anything was made


def test_the_matrix_is_large(tmp_path):
    assert len(CASES) + len(BAD_OPTIONS) >= 100


# ---- the environment: folders that cannot take the outputs

def test_read_only_output_folder_is_bad_usage(write_tables, tmp_path, capsys, monkeypatch):
    import engine.outputs as outputs

    def read_only(*args, **kwargs):
        raise OSError(errno.EROFS, "Read-only file system")

    monkeypatch.setattr(outputs.tempfile, "mkstemp", read_only)
    paths = write_tables()
    code, _, err = run(["check", "--collars", paths["collars"], "--surveys", paths["surveys"], "--intervals",
                        paths["intervals"], "--out", tmp_path / "o"], capsys)
    assert code == 2 and "Read-only file system" in err and "--out" in err


def test_a_full_disk_is_reported_not_a_traceback(write_tables, tmp_path, capsys, monkeypatch):
    def full(self, *args, **kwargs):
        raise OSError(errno.ENOSPC, "No space left on device", str(args[0]) if args else None)

    monkeypatch.setattr(pd.DataFrame, "to_csv", full)
    paths = write_tables()
    code, _, err = run(["desurvey", "--collars", paths["collars"], "--surveys", paths["surveys"], "--intervals",
                        paths["intervals"], "--out", tmp_path / "o"], capsys)
    assert code == 1 and "No space left on device" in err and "Traceback" not in err
    assert not [p for p in (tmp_path / "o").iterdir() if ".part" in p.name]  # no temporary left behind
