"""The command line: exit codes, outputs, and hostile files (never a traceback)."""

import json
import os
import subprocess
import sys
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from engine.cli import main

from .conftest import GOOD_INTERVALS

ROOT = Path(__file__).resolve().parents[2]


def run(argv, capsys):
    code = main([str(a) for a in argv])
    captured = capsys.readouterr()
    return code, captured.out, captured.err


def table_args(paths):
    return ["--collars", paths["collars"], "--surveys", paths["surveys"], "--intervals", paths["intervals"]]


def test_check_clean_tables_exits_0(write_tables, tmp_path, capsys):
    code, out, err = run(["check", *table_args(write_tables()), "--out", tmp_path / "o"], capsys)
    assert code == 0, err
    findings = pd.read_csv(tmp_path / "o" / "findings.csv")
    assert list(findings.columns) == ["table", "line", "hole", "column", "severity", "problem"]
    assert len(findings) == 0
    assert "0 error(s)" in out


def test_check_with_errors_exits_1_and_lists_them(write_tables, tmp_path, capsys):
    intervals = GOOD_INTERVALS + "B,1,3,abc,SCHIST\nQ,0,1,1,SCHIST\n"
    code, out, _ = run(["check", *table_args(write_tables(intervals=intervals)), "--out", tmp_path], capsys)
    assert code == 1
    findings = pd.read_csv(tmp_path / "findings.csv")
    assert sorted(findings["line"]) == [6, 6, 7]
    rejected = pd.read_csv(tmp_path / "rejected.csv")
    assert sorted(rejected["line"]) == [6, 7] and set(rejected["table"]) == {"intervals"}
    assert "would be left out" in out


def test_desurvey_refuses_errors_then_skips_bad_rows(write_tables, tmp_path, capsys):
    intervals = GOOD_INTERVALS + "B,1,3,abc,SCHIST\n"
    paths = write_tables(intervals=intervals)
    code, _, err = run(["desurvey", *table_args(paths), "--out", tmp_path / "a"], capsys)
    assert code == 1 and "--skip-bad-rows" in err and "line 6" in err
    assert not (tmp_path / "a" / "samples.csv").exists()
    code, out, err = run(["desurvey", *table_args(paths), "--out", tmp_path / "b", "--skip-bad-rows"], capsys)
    assert code == 0, err
    samples = pd.read_csv(tmp_path / "b" / "samples.csv")
    rejected = pd.read_csv(tmp_path / "b" / "rejected.csv")
    assert len(samples) + len(rejected) == 5
    assert rejected["line"].tolist() == [6] and rejected["table"].tolist() == ["intervals"]


def test_desurvey_outputs(write_tables, tmp_path, capsys):
    code, _, err = run(["desurvey", *table_args(write_tables()), "--out", tmp_path, "--step", "10"], capsys)
    assert code == 0, err
    traces = pd.read_csv(tmp_path / "traces.csv")
    assert list(traces.columns) == ["hole", "depth", "x", "y", "z"]
    assert traces[traces.hole == "A"]["depth"].tolist() == [0, 10, 20, 25, 30]
    samples = pd.read_csv(tmp_path / "samples.csv")
    assert list(samples.columns) == ["hole", "from", "to", "x", "y", "z", "au", "lith"]
    b = samples[samples.hole == "B"].iloc[0]
    assert np.allclose([b.x, b.y, b.z], [110, 200, 49])  # vertical hole B, mid-depth 1 m
    assert not list(tmp_path.glob(".*part"))  # no temporary files left behind


@pytest.mark.parametrize("method", ["minimum-curvature", "balanced-tangential", "tangential"])
def test_desurvey_methods(write_tables, tmp_path, capsys, method):
    code, _, _ = run(["desurvey", *table_args(write_tables()), "--out", tmp_path, "--method", method], capsys)
    assert code == 0


@pytest.mark.parametrize("command", ["check", "desurvey", "composite", "variogram", "fit", "run", "demo"])
def test_help_of_each_command(command, capsys):
    with pytest.raises(SystemExit) as info:
        main([command, "--help"])
    assert info.value.code == 0
    assert "--out" in capsys.readouterr().out


def test_bad_usage_exits_2(write_tables, tmp_path, capsys):
    with pytest.raises(SystemExit) as info:
        main(["check", "--collars", "x.csv"])
    assert info.value.code == 2
    code, _, err = run(["check", *table_args(write_tables()), "--column", "colour=red", "--out", tmp_path], capsys)
    assert code == 2 and "unknown role" in err
    paths = write_tables()
    paths["surveys"] = tmp_path / "nope.csv"
    code, _, err = run(["check", *table_args(paths), "--out", tmp_path], capsys)
    assert code == 2 and "does not exist" in err
    blocker = tmp_path / "afile"
    blocker.write_text("x")
    code, _, err = run(["check", *table_args(write_tables()), "--out", blocker], capsys)
    assert code == 2


def test_quiet_prints_nothing(write_tables, tmp_path, capsys):
    code, out, err = run(["check", *table_args(write_tables()), "--out", tmp_path, "--quiet"], capsys)
    assert code == 0 and out == "" and err == ""


# ---- hostile files: exit 0, 1 or 2 with a clear message, never a traceback

rng = np.random.default_rng(0)
HOSTILE = {
    "empty": (b"", 1, "empty"),
    "header only": (b"hole,from,to,au\n", 1, "no rows"),
    "binary garbage": (bytes(rng.integers(0, 256, 4000, dtype=np.uint8)), 1, "not a text table"),
    "high bytes": (bytes(rng.integers(128, 256, 4000, dtype=np.uint8)), 1, "intervals"),
    "truncated row": (b"hole,from,to,au\nA,0,1,0.5\nA,1,2", 1, None),
    "truncated quote": (b'hole,from,to,au\nA,0,1,0.5\nA,1,2,"0.', 1, None),
    "unknown delimiter": (b"hole:from:to:au\nA:0:1:0.5\n", 1, "separated"),
    "duplicate headers": (b"hole,from,to,au,au\nA,0,1,0.5,0.6\n", 1, "appears twice"),
    "too many fields": (b"hole,from,to,au\nA,0,1,0.5\nA,1,2,0.5,9,9\n", 1, "line 3"),
    "huge values": (b"hole,from,to,au\nA,0,1,1e308\nA,1,2,1e999\nB,0,1,0.5\n", 1, None),
    "only blank lines": (b"\n\n\n", 1, "empty"),
    "utf16": ("hole,from,to,au\nA,0,1,0.5\n".encode("utf-16"), 1, "UTF-16"),
}


@pytest.mark.parametrize("name", list(HOSTILE))
def test_hostile_interval_files(name, write_tables, tmp_path, capsys):
    data, expected, words = HOSTILE[name]
    paths = write_tables(intervals=data)
    code, out, err = run(["check", *table_args(paths), "--out", tmp_path / "o"], capsys)
    assert code == expected, (out, err)
    assert "Traceback" not in err
    if words:
        assert words in err + out
    if code == 1 and "error:" in err:
        assert "intervals" in err  # the message names the file


def test_hostile_collar_values_and_unicode_ids(write_tables, tmp_path, capsys):
    collars = "hole,x,y,z,depth\n孔-001,1e308,200,50,30\nÜnter Tal,110,200,50,1e308\n"
    surveys = "hole,depth,azimuth,dip\n孔-001,0,90,-60\nÜnter Tal,0,0,-90\n"
    intervals = "hole,from,to,au\n孔-001,0,1,0.5\nÜnter Tal,0,2,0.4\n"
    paths = write_tables(collars, surveys, intervals)
    code, out, err = run(["check", *table_args(paths), "--out", tmp_path], capsys)
    assert code == 1 and "Traceback" not in err
    findings = pd.read_csv(tmp_path / "findings.csv")
    assert set(findings["hole"]) == {"孔-001", "Ünter Tal"}
    # both collars are in error: with --skip-bad-rows nothing is left, which is an error, not a success
    code, out, err = run(["desurvey", *table_args(paths), "--out", tmp_path / "d", "--skip-bad-rows"], capsys)
    assert code == 1 and "no collar row is left" in err
    rejected = pd.read_csv(tmp_path / "d" / "rejected.csv")
    assert len(rejected) == 6  # every input row, each with its reason


def test_unicode_ids_clean_run(write_tables, tmp_path, capsys):
    collars = "hole,x,y,z,depth\n孔-001,100,200,50,30\n"
    surveys = "hole,depth,azimuth,dip\n孔-001,0,90,-60\n"
    intervals = "hole,from,to,au\n孔-001,0,1,0.5\n"
    code, out, err = run(["desurvey", *table_args(write_tables(collars, surveys, intervals)), "--out", tmp_path],
                         capsys)
    assert code == 0
    assert pd.read_csv(tmp_path / "samples.csv")["hole"].tolist() == ["孔-001"]


def test_console_script_in_a_subprocess_never_shows_a_traceback(write_tables, tmp_path):
    paths = write_tables(intervals=b"\x00\x01garbage")
    env = dict(os.environ, PYTHONIOENCODING="ascii")  # a console that cannot print the ids
    result = subprocess.run([sys.executable, "-m", "engine", "check", *map(str, table_args(paths)), "--out",
                             str(tmp_path)], capture_output=True, text=True, env=env, cwd=ROOT)
    assert result.returncode == 1
    assert "Traceback" not in result.stderr and "not a text table" in result.stderr


@pytest.mark.slow
def test_demo_runs(tmp_path, capsys):
    code, out, err = run(["demo", "--out", tmp_path, "--seed", "3"], capsys)
    assert code == 0, err
    for name in ("data/collars.csv", "data/surveys.csv", "data/intervals.csv", "data/truth.json",
                 "findings.csv", "traces.csv", "samples.csv", "composites.csv", "model.json", "pattern.json",
                 "variograms.csv", "volume.npz", "fit_variograms.csv"):
        assert (tmp_path / name).exists(), name
    assert "0 error(s)" in out and "major axis trend" in out
    assert "truth against fit" in out and "range ratio" in out and "competent or qualified person" in out
    # the nugget from the samples, carried to the composites (a pure nugget averages down: composite below sample)
    model = json.loads((tmp_path / "model.json").read_text())
    support = model["nugget_support"]
    assert "samples" in model["fit"]["nugget_from"] and support["sample_support"] > 0
    assert model["nugget"] == pytest.approx(support["composite_support"])
    assert support["composite_support"] < support["sample_support"]
    assert "at sample support" in out


def test_progress_bar_on_a_terminal_only(write_tables, tmp_path):
    # a pseudo-terminal on stderr shows the stage bar; a pipe shows none
    import pty  # POSIX only, as is CI

    paths = write_tables()
    argv = [sys.executable, "-m", "engine", "desurvey", *map(str, table_args(paths)), "--out", str(tmp_path)]
    master, slave = pty.openpty()
    process = subprocess.Popen(argv, stdout=subprocess.DEVNULL, stderr=slave, cwd=ROOT)
    os.close(slave)
    chunks = []
    while True:
        try:
            data = os.read(master, 4096)
        except OSError:  # the child closed its end
            break
        if not data:
            break
        chunks.append(data)
    process.wait()
    os.close(master)
    assert process.returncode == 0
    assert "desurveying" in b"".join(chunks).decode("utf-8", "replace")
    piped = subprocess.run(argv, capture_output=True, text=True, cwd=ROOT)
    assert piped.returncode == 0 and "desurveying" not in piped.stderr


def test_composite_end_to_end_on_a_synthetic_program(tmp_path, capsys):
    from synthetic_holes import ProgramSpec, generate_program

    program = generate_program(ProgramSpec(n_along=6, n_lines=4, hole_length_m=120.0), seed=12)
    paths = program.write(tmp_path / "data")
    code, out, err = run(["composite", *table_args(paths), "--length", "2", "--domain", "domain",
                          "--density", "density", "--density-default", "2.7", "--cap", "au_gpt=8",
                          "--out", tmp_path / "c"], capsys)
    assert code == 0, err
    composites = pd.read_csv(tmp_path / "c" / "composites.csv")
    assert list(composites.columns[:11]) == ["hole", "from", "to", "length", "sampled", "x", "y", "z", "domain",
                                             "au_gpt", "density"]
    check = pd.read_csv(tmp_path / "c" / "composite_check.csv")
    assert check["difference"].abs().max() < 1e-9
    assert set(check["domain"]) == {"OXIDE", "FRESH"}
    rejected = pd.read_csv(tmp_path / "c" / "rejected.csv")
    assert set(rejected["table"]) <= {"composites"}
    # what the composites hold plus what was left out is the capped input metal, per domain
    for domain, part in check[check.value == "au_gpt"].groupby("domain"):
        kept = composites[composites.domain == domain]
        assert part["composite_metal"].sum() + part["left_out_metal"].sum() == pytest.approx(
            part["input_after_cap"].sum(), rel=1e-12)
        assert len(kept) > 0
    assert "weighting: length x density" in out and "metal check" in out
    code, _, err = run(["composite", *table_args(paths), "--out", tmp_path / "d"], capsys)
    assert code == 2 and "--length" in err
    code, _, err = run(["composite", *table_args(paths), "--length", "2", "--density", "density",
                        "--out", tmp_path / "e"], capsys)
    assert code == 1 and "--density-default" in err


def small_composites(path):
    """600 composites of 20 vertical holes with a domain column, written to ``path``."""
    rng = np.random.default_rng(3)
    n = 600
    frame = pd.DataFrame({"hole": np.repeat([f"H{i}" for i in range(20)], 30),
                          "from": np.tile(np.arange(30) * 2.0, 20), "to": np.tile(np.arange(30) * 2.0 + 2, 20),
                          "x": np.repeat(rng.uniform(0, 200, 20), 30), "y": np.repeat(rng.uniform(0, 200, 20), 30),
                          "z": -np.tile(np.arange(30) * 2.0 + 1, 20), "au": rng.lognormal(size=n),
                          "domain": np.where(rng.uniform(size=n) < 0.7, "FRESH", "OXIDE")})
    frame.to_csv(path, index=False)
    return path


def test_variogram_command(tmp_path, capsys):
    path = small_composites(tmp_path / "composites.csv")
    code, out, err = run(["variogram", "--composites", path, "--value", "au", "--out", tmp_path / "v",
                          "--lag", "10", "--lags", "8", "--domain", "domain=FRESH"], capsys)
    assert code == 0, err
    table = pd.read_csv(tmp_path / "v" / "variograms.csv")
    assert list(table.columns[:8]) == ["set", "direction", "trend", "plunge", "lag", "distance", "pairs", "gamma"]
    assert set(table["set"]) == {"omni", "downhole"}  # with no set named: omni, down-hole and the volume
    volume = np.load(tmp_path / "v" / "volume.npz")
    assert volume["gamma"].shape == (21, 41, 41)
    code, _, _ = run(["variogram", "--composites", path, "--value", "au", "--out", tmp_path / "w", "--lag", "10",
                      "--directions", "0/0,90/0", "--transform", "normal-score", "--threads", "1"], capsys)
    assert code == 0
    table = pd.read_csv(tmp_path / "w" / "variograms.csv")
    assert set(table["direction"]) == {"0/0", "90/0"}
    code, _, err = run(["variogram", "--composites", path, "--value", "au", "--out", tmp_path / "f", "--lag", "10",
                        "--fan", "0/0/6", "--fan", "90/90/3"], capsys)
    assert code == 0, err
    fans = pd.read_csv(tmp_path / "f" / "variograms.csv")
    assert len(fans) == 9 * 10  # 6 + 3 directions of 10 lags (both fans hold the line 0/0)
    assert sorted(fans[fans.plunge == 0]["trend"].unique().tolist())[:3] == [0.0, 30.0, 60.0]
    code, _, err = run(["variogram", "--composites", path, "--value", "cu", "--out", tmp_path / "x"], capsys)
    assert code == 2 and "'cu'" in err and "au" in err  # an unknown column is bad usage, listing the columns
    code, _, err = run(["variogram", "--composites", path, "--value", "au", "--directions", "north",
                        "--out", tmp_path / "y"], capsys)
    assert code == 2 and "TREND/PLUNGE" in err


def test_variogram_command_on_dask_equals_the_local_run(tmp_path, capsys):
    pytest.importorskip("distributed")  # in the test extra: present wherever the README's install ran
    path = small_composites(tmp_path / "composites.csv")
    common = ["variogram", "--composites", path, "--value", "au", "--lag", "10", "--directions", "0/0,90/0",
              "--transform", "normal-score"]
    code, _, err = run([*common, "--out", tmp_path / "local"], capsys)
    assert code == 0, err
    code, _, err = run([*common, "--out", tmp_path / "dask", "--dask", "local:2"], capsys)
    assert code == 0, err
    local = pd.read_csv(tmp_path / "local" / "variograms.csv")
    on_dask = pd.read_csv(tmp_path / "dask" / "variograms.csv")
    assert on_dask["pairs"].tolist() == local["pairs"].tolist()
    assert np.allclose(on_dask["gamma"], local["gamma"], rtol=1e-9, equal_nan=True)


def test_hole_numbers_of_composites_match_their_names_when_a_hole_has_no_position():
    import numpy as np
    import pandas as pd

    from engine.cli import _composites_arrays

    frame = pd.DataFrame({"hole": ["A", "A", "B", "B", "C"], "x": [0.0, 0, np.nan, np.nan, 5],
                          "y": [0.0, 0, 0, 0, 0], "z": [0.0, -1, 0, -1, 0], "au": [1.0, 2, 3, 4, 5]})
    data = _composites_arrays(frame, "au", None)
    assert list(data.hole_names[data.hole]) == ["A", "A", "C"] and list(data.values) == [1.0, 2.0, 5.0]
    assert data.unplaced == 2


def test_run_takes_the_domain_column_as_the_input_spells_it(tmp_path, capsys):
    # the domain column is called Zone in the intervals; --domain names it so (here in other case),
    # also after compositing, in run and in the commands that read composites.csv
    from synthetic_holes import generate_program
    from synthetic_holes.recovery import recovery_spec

    program = generate_program(recovery_spec(n_along=6, n_lines=5, hole_length_m=120.0), seed=2)
    program.intervals = program.intervals.rename(columns={"domain": "Zone"})
    paths = program.write(tmp_path / "data")
    out = tmp_path / "run"
    code, stdout, err = run(["run", *table_args(paths), "--value", "AU_GPT", "--domain", "zone=FRESH",
                             "--bootstrap", "0", "--pairs-axis", "none", "--size", "400", "300", "--out", out], capsys)
    assert code == 0, err
    model = json.loads((out / "model.json").read_text())
    assert model["domain"] == "Zone=FRESH" and model["variable"] == "au_gpt"
    composites = pd.read_csv(out / "composites.csv")
    assert {"domain", "Zone"} <= set(composites.columns) and (composites["domain"] == composites["Zone"]).all()
    code, _, err = run(["stationarity", "--composites", out / "composites.csv", "--value", "au_gpt",
                        "--domain", "Zone=FRESH", "--out", tmp_path / "st"], capsys)
    assert code == 0, err
    st = json.loads((tmp_path / "st" / "stationarity.json").read_text())
    assert st["summary"]["count"] == int(((composites["Zone"] == "FRESH") & composites["au_gpt"].notna()).sum())
    code, _, err = run(["run", *table_args(paths), "--value", "au_gpt", "--domain", "Zone=fresh", "--bootstrap", "0",
                        "--out", tmp_path / "wrong"], capsys)
    assert code == 2 and "did you mean 'FRESH'" in err and "the intervals table" in err
    assert not (tmp_path / "wrong" / "composites.csv").exists()  # refused before compositing
