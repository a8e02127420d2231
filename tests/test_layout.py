"""The house rules of the layout (STYLE.md, "Layout") and of the README/CI contract."""

import re
import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]


def test_engine_imports_no_plotting_library():
    code = (
        "import sys, engine, engine.tables, engine.desurvey, engine.orientation, engine.cli, synthetic_holes\n"
        "bad = [m for m in ('pyvista', 'vtk', 'matplotlib') if m in sys.modules]\n"
        "print(','.join(bad))\n"
    )
    result = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, cwd=ROOT)
    assert result.returncode == 0, result.stderr
    assert result.stdout.strip() == ""


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
