"""The house rules of the layout (STYLE.md, "Layout") and of the README/CI contract."""

import re
import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]


def test_engine_imports_no_plotting_library():
    # every module of engine (and synthetic_holes), imported in a fresh interpreter: none may pull in
    # a plotting or 3D library, directly or through another module
    code = (
        "import importlib, pkgutil, sys\n"
        "import engine, synthetic_holes\n"
        "names = []\n"
        "for package in (engine, synthetic_holes):\n"
        "    for info in pkgutil.walk_packages(package.__path__, package.__name__ + '.'):\n"
        "        importlib.import_module(info.name)\n"
        "        names.append(info.name)\n"
        "bad = [m for m in sys.modules if m.split('.')[0] in ('pyvista', 'vtk', 'vtkmodules', 'matplotlib', 'trame')]\n"
        "print(len(names))\n"
        "print(','.join(sorted(names)))\n"
        "print(','.join(sorted(bad)))\n"
    )
    result = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, cwd=ROOT)
    assert result.returncode == 0, result.stderr
    count, names, bad = (result.stdout.splitlines() + ["", "", ""])[:3]
    modules = {p.relative_to(ROOT).with_suffix("").as_posix().replace("/", ".").removesuffix(".__init__")
               for folder in ("engine", "synthetic_holes") for p in (ROOT / folder).rglob("*.py")}
    modules -= {"engine", "synthetic_holes", "engine.__main__"}
    imported = set(names.split(","))
    assert modules <= imported | {"engine.__main__"}, modules - imported
    assert int(count) >= len(modules) and bad == "", bad


def readme_commands():
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    blocks = re.findall(r"<!-- (demo|test) command -->\n```[a-z]*\n(.+?)\n```", text)
    return dict(blocks), text


def test_readme_states_the_two_fresh_machine_commands_and_the_caution():
    commands, text = readme_commands()
    assert "drillaxis demo" in commands["demo"] and commands["demo"].startswith("pip install")
    assert "pytest" in commands["test"] and commands["test"].startswith("pip install")
    assert "competent or qualified person" in text


def test_ci_runs_the_readme_test_command():
    commands, _ = readme_commands()
    script = (ROOT / ".ci" / "run").read_text()
    assert "test command -->" in script
    extracted = subprocess.run(
        ["awk", '/<!-- test command -->/{getline; getline; print; exit}', "README.md"],
        capture_output=True, text=True, cwd=ROOT,
    ).stdout.strip()
    assert extracted == commands["test"]


def test_python_lines_fit_in_120_characters():
    # house style: lines of at most 120 characters (docs/ and data excepted)
    long = []
    for folder in ("engine", "viewer", "synthetic_holes", "tests", "benchmarks"):
        for path in (ROOT / folder).rglob("*.py"):
            for number, line in enumerate(path.read_text(encoding="utf-8").splitlines(), start=1):
                if len(line) > 120:
                    long.append(f"{path.relative_to(ROOT)}:{number}")
    assert long == []
