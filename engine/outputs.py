"""Output files appear whole or not at all: each is written to a temporary name in the same folder,
flushed, then renamed over the final name (an atomic rename on POSIX and Windows)."""

from __future__ import annotations

import contextlib
import json
import math
import os
import tempfile
from pathlib import Path

import pandas as pd


@contextlib.contextmanager
def atomic_path(path, keep_extension: bool = False):
    """Yield a temporary path beside ``path``; on success rename it to ``path``, else remove it.
    With ``keep_extension`` the temporary name ends in the final one's extension too (for writers
    that choose the format by it)."""
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    suffix = ".part" + (path.suffix if keep_extension else "")
    handle, temporary = tempfile.mkstemp(prefix=f".{path.name}.", suffix=suffix, dir=path.parent)
    os.close(handle)
    umask = os.umask(0)
    os.umask(umask)
    os.chmod(temporary, 0o666 & ~umask)  # mkstemp makes 0600; outputs follow the umask like any file
    try:
        yield Path(temporary)
        os.replace(temporary, path)
    except BaseException:
        with contextlib.suppress(FileNotFoundError):
            os.remove(temporary)
        raise


def write_csv(frame: pd.DataFrame, path, **options) -> Path:
    """Write a table as UTF-8 CSV with '\\n' line ends and full float precision."""
    with atomic_path(path) as temporary:
        frame.to_csv(temporary, index=False, lineterminator="\n", **options)
    return Path(path)


def _plain(value):
    """JSON-safe copy: numpy scalars to Python, NaN and infinity to null."""
    if isinstance(value, dict):
        return {str(k): _plain(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_plain(v) for v in value]
    if hasattr(value, "item") and not isinstance(value, (str, bytes)):
        value = value.item()
    if isinstance(value, float) and not math.isfinite(value):
        return None
    return value


def write_json(data, path) -> Path:
    with atomic_path(path) as temporary:
        temporary.write_text(json.dumps(_plain(data), indent=2, ensure_ascii=False) + "\n", encoding="utf-8")
    return Path(path)
