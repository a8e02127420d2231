"""What a reviewer needs to reproduce a run: input checksums, options, software versions, time."""

from __future__ import annotations

import datetime
import platform
import sys
from importlib import metadata
from pathlib import Path

PACKAGES = ("drillaxis", "numpy", "numba", "scipy", "pandas", "pyarrow", "matplotlib")


def sha256(path) -> str:
    from .outputs import file_digest

    return file_digest(path)


def versions() -> dict:
    found = {"python": platform.python_version()}
    for name in PACKAGES:
        try:
            found[name] = metadata.version(name)
        except metadata.PackageNotFoundError:
            continue
    return found


def provenance(inputs: dict, options: dict, rows: dict | None = None) -> dict:
    """``inputs``: role -> path; ``options``: the command's settings; ``rows``: role -> row count."""
    rows = rows or {}
    options = dict(options)
    command = options.pop("command_line", None)
    command = list(sys.argv[1:]) if command is None else list(command)
    listed = []
    for role, path in inputs.items():
        if path is None or not Path(path).is_file():
            continue
        listed.append({"role": role, "path": str(path), "sha256": sha256(path), "rows": rows.get(role)})
    plain = {k: (v if isinstance(v, (int, float, str, bool, type(None))) else str(v)) for k, v in options.items()}
    return {"inputs": listed, "options": plain, "versions": versions(), "command": " ".join(["drillaxis", *command]),
            "written": datetime.datetime.now(datetime.timezone.utc).strftime("%Y-%m-%d %H:%M:%S UTC")}
