"""Output files: whole or absent, one run's set at a time, a manifest written last, CSV precision."""

import json

import numpy as np
import pandas as pd

from engine.outputs import OutputFolder, atomic_path, write_csv, write_json


def test_clear_removes_the_commands_own_outputs_and_stale_temporaries_only(tmp_path):
    for name in ("model.json", "stationarity_swaths.png", "notes.txt", ".model.json.abcd1234.part",
                 ".scene.png.a1b2c3d4.part.png", ".hidden-by-the-user"):
        (tmp_path / name).write_text("x")
    (tmp_path / "scene").mkdir()
    (tmp_path / "scene" / ".scene_0.vtp.zzzz9999.part").write_text("x")
    (tmp_path / ".scene.vtm.q1w2e3r4.part").mkdir()
    OutputFolder(tmp_path, "fit", ("model.json", "stationarity_*.png")).clear()
    left = sorted(p.relative_to(tmp_path).as_posix() for p in tmp_path.rglob("*"))
    assert left == [".hidden-by-the-user", "notes.txt", "scene"]


def test_the_manifest_lists_this_commands_files_and_keeps_unchanged_earlier_ones(tmp_path):
    first = OutputFolder(tmp_path, "fit", ("model.json",)).clear()
    write_json({"a": 1}, tmp_path / "model.json")
    write_csv(pd.DataFrame({"x": [1.0]}), tmp_path / "fit_variograms.csv")
    first.finish()
    manifest = json.loads((tmp_path / "manifest.json").read_text())
    assert [e["name"] for e in manifest["files"]] == ["fit_variograms.csv", "model.json"]
    second = OutputFolder(tmp_path, "view", ("scene.png",)).clear()
    assert not (tmp_path / "manifest.json").exists()  # a command under way: no manifest
    with atomic_path(tmp_path / "scene.png") as temporary:
        temporary.write_bytes(b"png")
    (tmp_path / "fit_variograms.csv").write_text("x\n2\n")  # changed since it was listed
    second.finish()
    manifest = json.loads((tmp_path / "manifest.json").read_text())
    assert {e["name"]: e["command"] for e in manifest["files"]} == {"model.json": "fit", "scene.png": "view"}


def test_csv_numbers_are_written_without_round_off_noise(tmp_path):
    frame = pd.DataFrame({"hole": ["A"], "x": [100.0 + 6.12e-17], "y": [6.123233995736766e-17], "z": [-1e-13],
                          "au": [0.1 + 0.2], "cu": [1.2000000000000002], "grade": [0.123456789012345678]})
    write_csv(frame, tmp_path / "t.csv")
    text = (tmp_path / "t.csv").read_text()
    assert text.splitlines()[1] == "A,100,0,0,0.3,1.2,0.123456789012346"
    back = pd.read_csv(tmp_path / "t.csv")
    assert np.isclose(back["grade"][0], 0.123456789012345678, rtol=1e-14, atol=0)
