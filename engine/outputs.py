"""Output files appear whole or not at all: each is written to a temporary name in the same folder,
flushed, then renamed over the final name (an atomic rename on POSIX and Windows)."""

from __future__ import annotations

import contextlib
import datetime
import hashlib
import json
import math
import os
import re
import shutil
import tempfile
from fnmatch import fnmatch
from pathlib import Path

import pandas as pd

from .errors import UsageError


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
        _record(path)
    except BaseException:
        with contextlib.suppress(FileNotFoundError):
            os.remove(temporary)
        raise


#: Columns in metres (positions, depths, lengths): written to the micrometre, so that round-off of
#: the trigonometry (a north of 6.12e-17 for a hole heading east) does not reach the file.
METRE_COLUMNS = frozenset({"x", "y", "z", "x_from", "y_from", "z_from", "x_to", "y_to", "z_to", "from", "to",
                           "length", "sampled", "depth", "distance", "lag"})
METRE_DECIMALS = 6
#: Other floats: 15 significant digits, which every decimal number of up to 15 digits survives
#: exactly (1.2 stays 1.2, not 1.2000000000000002).
FLOAT_FORMAT = "%.15g"


@contextlib.contextmanager
def atomic_folder(path):
    """For writers that put an index file ``path`` and a folder of pieces beside it (``name/``, as
    VTK's multiblock writer does): yield a temporary folder to write both into; on success the
    pieces' folder replaces the old one (the old index removed first) and the index is renamed into
    place last. A kill leaves whole pieces and either no index or one whose pieces are all there,
    and perhaps a hidden temporary folder, which the next run removes."""
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    temporary = Path(tempfile.mkdtemp(prefix=f".{path.name}.", suffix=".part", dir=path.parent))
    pieces = path.with_suffix("")
    try:
        yield temporary
        written = temporary / pieces.name
        with contextlib.suppress(FileNotFoundError):  # the old index goes first: never one without its pieces
            os.remove(path)
        if pieces.exists():
            old = Path(tempfile.mkdtemp(prefix=f".{pieces.name}.", suffix=".part", dir=path.parent))
            os.replace(pieces, old / pieces.name)
            shutil.rmtree(old, ignore_errors=True)
        if written.exists():
            os.replace(written, pieces)
            for piece in sorted(pieces.rglob("*")):
                if piece.is_file():
                    _record(piece)
        os.replace(temporary / path.name, path)
        _record(path)
    finally:
        shutil.rmtree(temporary, ignore_errors=True)


def write_csv(frame: pd.DataFrame, path, **options) -> Path:
    """Write a table as UTF-8 CSV with '\\n' line ends, metre columns to the micrometre and other
    floats to 15 significant digits."""
    metres = [c for c in frame.columns if (c in METRE_COLUMNS or str(c).endswith("_sampled"))
              and pd.api.types.is_float_dtype(frame[c].dtype)]
    if metres:
        frame = frame.copy(deep=False)
        for column in metres:
            frame[column] = frame[column].round(METRE_DECIMALS) + 0.0  # + 0.0: no "-0.0"
    options.setdefault("float_format", FLOAT_FORMAT)
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


# --------------------------------------------------------------------------------------------
# the output folder of one command
# --------------------------------------------------------------------------------------------

MANIFEST = "manifest.json"
#: The names of drillaxis's own temporary files and folders: "." + final name + "." + 8 characters of
#: mkstemp + ".part" (+ the final extension). Only these are cleaned; a user's files never match.
_TEMPORARY = re.compile(r"^\..+\.[A-Za-z0-9_]{8}\.part(\.[A-Za-z0-9]+)?$")
_written: list[Path] = []  # every output renamed into place by this process, in order


def _record(path: Path) -> None:
    _written.append(Path(path).resolve())


def file_digest(path) -> str:
    digest = hashlib.sha256()
    with open(path, "rb") as handle:
        for block in iter(lambda: handle.read(1 << 20), b""):
            digest.update(block)
    return digest.hexdigest()


def _remove_temporaries(folder: Path) -> None:
    """Remove drillaxis's own temporaries (files and folders) left in ``folder`` by a killed run."""
    for entry in list(folder.iterdir()):
        if _TEMPORARY.match(entry.name):
            if entry.is_dir() and not entry.is_symlink():
                shutil.rmtree(entry, ignore_errors=True)
            else:
                with contextlib.suppress(FileNotFoundError):
                    os.remove(entry)


class OutputFolder:
    """The ``--out`` folder of one command, kept consistent.

    ``clear()``, called once the command has checked its inputs and before it writes, removes the
    command's own outputs of an earlier run (``outputs``: names and glob patterns), drillaxis's
    stale temporaries and the manifest; ``finish()``, called last, writes ``manifest.json`` listing
    every file this command wrote (size and SHA-256) and the files of an earlier manifest still
    present unchanged. A folder without a manifest holds the outputs of a run that did not finish.
    """

    def __init__(self, path, command: str, outputs=()):
        self.path = Path(path)
        self.command = command
        self.outputs = tuple(outputs)
        try:
            self.path.mkdir(parents=True, exist_ok=True)
        except OSError as exc:
            raise UsageError(f"--out {str(path)!r}: cannot create the folder ({exc.strerror}).") from None
        if not self.path.is_dir():
            raise UsageError(f"--out {str(path)!r} is not a folder.")
        try:  # a folder that cannot take a file is a usage error now, not a traceback later
            handle, probe = tempfile.mkstemp(prefix=".drillaxis-probe.", dir=self.path)
            os.close(handle)
            os.remove(probe)
        except OSError as exc:
            raise UsageError(f"--out {str(path)!r}: cannot write in this folder ({exc.strerror}).") from None
        self._start = len(_written)
        self._carried: dict = {}
        self._cleared = False

    def clear(self) -> "OutputFolder":
        if self._cleared:
            return self
        self._cleared = True
        previous = self.path / MANIFEST
        entries = {}
        if previous.is_file():
            try:
                entries = {e["name"]: e for e in json.loads(previous.read_text(encoding="utf-8")).get("files", [])}
            except (OSError, ValueError, KeyError, TypeError, AttributeError):
                entries = {}
            with contextlib.suppress(FileNotFoundError):
                os.remove(previous)
        removed = set()
        for pattern in self.outputs:
            for found in self.path.glob(pattern):
                removed.add(found.relative_to(self.path).as_posix())
                if found.is_dir() and not found.is_symlink():
                    shutil.rmtree(found, ignore_errors=True)
                else:
                    with contextlib.suppress(FileNotFoundError):
                        os.remove(found)
        _remove_temporaries(self.path)
        for folder in self.path.iterdir():  # and one level down (scene/, data/)
            if folder.is_dir() and not folder.is_symlink():
                _remove_temporaries(folder)
        self._carried = {name: e for name, e in entries.items()
                         if name not in removed and not any(fnmatch(name, p) for p in self.outputs)}
        return self

    def finish(self) -> Path:
        """Write ``manifest.json`` last: what this folder holds and which command wrote it."""
        self.clear()
        mine = {}
        for path in _written[self._start:]:
            try:
                name = path.relative_to(self.path.resolve()).as_posix()
            except ValueError:
                continue
            if path.is_file():
                mine[name] = {"name": name, "bytes": path.stat().st_size, "sha256": file_digest(path),
                              "command": self.command}
        files = dict(mine)
        for name, entry in self._carried.items():
            path = self.path / name
            if name in files or not path.is_file():
                continue
            if entry.get("bytes") == path.stat().st_size and entry.get("sha256") == file_digest(path):
                files[name] = entry
        data = {"schema": "drillaxis.manifest/1", "command": self.command, "complete": True,
                "written": datetime.datetime.now(datetime.timezone.utc).strftime("%Y-%m-%d %H:%M:%S UTC"),
                "files": [files[name] for name in sorted(files)]}
        return write_json(data, self.path / MANIFEST)
