"""Which traces a farm checks: files, folders (searched recursively) and glob patterns.

The list is sorted by path, so reports and JSON come out in the same order whatever order the
file system lists folders in. Inputs that name nothing are not errors that stop the batch: each
becomes a :class:`Missing` entry with a one-line reason, reported beside unreadable traces.
"""
from __future__ import annotations

import glob
import os
from dataclasses import dataclass
from pathlib import Path

#: File name endings taken from folders (HDF5 traces; a file named explicitly is taken as is).
TRACE_SUFFIXES = (".h5", ".hdf5")
_GLOB_CHARS = set("*?[")


@dataclass(frozen=True)
class Missing:
    """An input that named no trace: ``input`` as given, ``reason`` in plain words."""

    input: str
    reason: str


@dataclass(frozen=True)
class TraceInput:
    """One trace to check.

    Attributes:
        path: the file, as found (the input folder joined with the relative path).
        key: the path relative to the folder or glob root it was found under (the file name for a
            file named directly); baselines match traces by key, so tonight's ``TODAY/bot_3.h5`` is
            compared with yesterday's ``YESTERDAY/bot_3.h5``.
    """

    path: str
    key: str


def find_traces(inputs) -> tuple[list[TraceInput], list[Missing]]:
    """Expand ``inputs`` (str paths, folders, glob patterns) into traces sorted by path.

    A file found twice (by two inputs) is checked once; the first input that found it sets its key.
    """
    found: dict[str, TraceInput] = {}
    missing: list[Missing] = []
    for text in inputs:
        text = str(text)
        if _is_glob(text) and not os.path.exists(text):
            items = _from_glob(text)
            if not items:
                missing.append(Missing(text, "the pattern matches no file"))
        elif os.path.isdir(text):
            items = _from_folder(text)
            if not items:
                missing.append(Missing(text, f"the directory holds no trace file ({', '.join(TRACE_SUFFIXES)})"))
        elif os.path.exists(text):
            items = [TraceInput(text, Path(text).name)]
        else:
            missing.append(Missing(text, "no such file or folder"))
            items = []
        for item in items:
            found.setdefault(os.path.normpath(item.path), item)
    return sorted(found.values(), key=lambda t: t.path), missing


def _is_glob(text: str) -> bool:
    return any(c in _GLOB_CHARS for c in text)


def _from_folder(folder: str) -> list[TraceInput]:
    out = []
    for dirpath, dirnames, filenames in os.walk(folder, followlinks=False):
        dirnames.sort()
        for name in filenames:
            if name.lower().endswith(TRACE_SUFFIXES):
                path = os.path.join(dirpath, name)
                out.append(TraceInput(path, Path(os.path.relpath(path, folder)).as_posix()))
    return out


def _from_glob(pattern: str) -> list[TraceInput]:
    """Files matching ``pattern`` (``**`` spans folders); keys relative to the part before the
    first wildcard; matching folders are searched like folder inputs."""
    root = _glob_root(pattern)
    out = []
    for path in glob.glob(pattern, recursive=True):
        if os.path.isdir(path):
            out += [TraceInput(t.path, Path(os.path.relpath(t.path, root)).as_posix()) for t in _from_folder(path)]
        elif os.path.isfile(path):
            out.append(TraceInput(path, Path(os.path.relpath(path, root)).as_posix()))
    return out


def _glob_root(pattern: str) -> str:
    parts = Path(pattern).parts
    fixed = []
    for part in parts:
        if _is_glob(part):
            break
        fixed.append(part)
    return str(Path(*fixed)) if fixed else "."
