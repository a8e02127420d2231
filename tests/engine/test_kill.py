"""A run killed at any moment leaves only whole files, and never a mix of two runs.

``drillaxis run`` is started into a folder that holds a finished run, and killed (SIGKILL: no chance
to tidy up) when a given output or temporary appears: from the first findings to the middle of the
3D scene's files. After each kill every file present must read whole, the folder must hold no file of
the older run, and there must be no manifest (the mark of a finished run). Two polite kills (SIGTERM)
must leave no temporary at all. A last, finished run must leave no stale temporary of the killed ones
and a manifest that lists exactly the files present.
"""

import json
import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from synthetic_holes.program import generate_program
from synthetic_holes.recovery import recovery_spec

ROOT = Path(__file__).resolve().parents[2]
pytestmark = pytest.mark.slow

# (what must appear in the output folder, the signal sent then); a name starting with "." is the
# beginning of a temporary's name: the kill lands while that output is being written
MOMENTS = [
    ("findings.csv", signal.SIGKILL),
    ("composites.csv", signal.SIGKILL),
    ("composite_summary.json", signal.SIGKILL),
    ("stationarity.json", signal.SIGKILL),
    ("model.json", signal.SIGKILL),
    ("stationarity_swaths.png", signal.SIGKILL),
    (".scene.png.", signal.SIGKILL),
    ("scene_section.png", signal.SIGKILL),
    (".scene.html.", signal.SIGKILL),
    (".scene.vtm.", signal.SIGKILL),
    ("fit_variograms.csv", signal.SIGTERM),
    (".scene.html.", signal.SIGTERM),
]


def readable(path: Path):
    """Read a file of the run as its kind is read; raise when it is not whole."""
    suffix = path.suffix
    if suffix == ".csv":
        pd.read_csv(path)
    elif suffix == ".json":
        json.loads(path.read_text(encoding="utf-8"))
    elif suffix == ".png":
        from PIL import Image

        with Image.open(path) as image:
            image.verify()
    elif suffix == ".npz":
        with np.load(path) as data:
            for key in data.files:
                data[key]
    elif suffix == ".html":
        assert path.read_text(encoding="utf-8").rstrip().endswith("</html>"), path
    elif suffix in (".vtm", ".vtp", ".vtu", ".vti"):
        import pyvista as pv

        data = pv.read(path)
        assert data is not None and (suffix != ".vtm" or len(data) > 0), path
    else:
        raise AssertionError(f"an output of unknown kind: {path}")


def appeared(out: Path, trigger: str, since: float) -> bool:
    """Whether this run has written ``trigger`` (or begun a temporary named so) since ``since``."""
    try:
        with os.scandir(out) as entries:
            for entry in entries:
                if entry.name == trigger or (trigger.startswith(".") and entry.name.startswith(trigger)):
                    try:
                        if entry.stat().st_mtime >= since:
                            return True
                    except FileNotFoundError:  # renamed away between the listing and the look
                        continue
    except FileNotFoundError:
        pass
    return False


def files(out: Path):
    return sorted(p for p in out.rglob("*") if p.is_file())


def temporaries(out: Path):
    return sorted(p for p in out.rglob("*") if ".part" in p.name)


@pytest.fixture(scope="module")
def tables(tmp_path_factory):
    folder = tmp_path_factory.mktemp("kill")
    program = generate_program(recovery_spec(n_along=8, n_lines=6, hole_length_m=150.0), seed=4)
    return program.write(folder / "data"), folder


def command(paths, out):
    return [sys.executable, "-m", "engine", "run", "--collars", str(paths["collars"]), "--surveys",
            str(paths["surveys"]), "--intervals", str(paths["intervals"]), "--value", "au_gpt", "--bootstrap", "3",
            "--size", "640", "480", "--out", str(out), "--quiet"]


def test_a_run_killed_at_any_moment_leaves_whole_files_of_one_run(tables):
    paths, folder = tables
    out = folder / "run"
    done = subprocess.run(command(paths, out), capture_output=True, text=True, cwd=ROOT)
    assert done.returncode == 0, done.stderr
    killed = 0
    for trigger, sig in MOMENTS:
        started = time.time()
        time.sleep(0.02)  # file times of this run are then later than any of the finished one
        process = subprocess.Popen(command(paths, out), stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, cwd=ROOT)
        hit = False
        while process.poll() is None:
            if appeared(out, trigger, started):
                os.kill(process.pid, sig)
                hit = True
                break
            time.sleep(0.001)
        process.wait(timeout=120)
        assert hit, f"the run ended before {trigger} appeared: {process.stderr.read().decode()[-2000:]}"
        killed += 1
        if sig == signal.SIGTERM:
            assert process.returncode == 143, (trigger, process.returncode, process.stderr.read().decode()[-2000:])
            assert temporaries(out) == [], trigger  # a polite kill tidies up its temporaries
        else:
            assert process.returncode == -signal.SIGKILL
        present = [p for p in files(out) if ".part" not in p.name and ".part" not in p.parent.name]
        assert not (out / "manifest.json").exists(), trigger  # an unfinished run has no manifest
        for path in present:
            readable(path)  # every file present is whole
            assert path.stat().st_mtime >= started, (trigger, path)  # and belongs to this run, not the older one
    assert killed == len(MOMENTS)
    done = subprocess.run(command(paths, out), capture_output=True, text=True, cwd=ROOT)
    assert done.returncode == 0, done.stderr
    assert temporaries(out) == []  # the finished run cleaned what the killed ones left
    manifest = json.loads((out / "manifest.json").read_text())
    listed = {entry["name"] for entry in manifest["files"]}
    assert listed == {p.relative_to(out).as_posix() for p in files(out)} - {"manifest.json"}
    for path in files(out):
        readable(path)
