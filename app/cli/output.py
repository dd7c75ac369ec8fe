"""Writing command output: stdout that survives a closed pipe, files written atomically, output
paths checked before any work starts."""
from __future__ import annotations

import json
import os
import sys
from pathlib import Path

from resweep.core.check.kinds import KINDS
from resweep.core.format.atomic import write_atomic

#: Width of the kind column of the human summaries (the longest kind name and a space).
KIND_COLUMN = max(14, max(len(k) for k in KINDS) + 1)


class Stdout:
    """stdout that a closed pipe cannot turn into an exception.

    When the reader goes away (``resweep check T | head -1``), the first failed write points file
    descriptor 1 at the null device (so the interpreter's flush at exit stays quiet) and every later
    write is dropped; the command carries on and its exit status stays the one it decides.
    """

    def __init__(self, stream=None):
        self.stream = stream if stream is not None else sys.stdout
        self.closed_pipe = False

    def write(self, text: str) -> None:
        if self.closed_pipe:
            return
        try:
            self.stream.write(text)
            self.stream.flush()
        except BrokenPipeError:
            self.closed_pipe = True
            silence_stdout()


def silence_stdout() -> None:
    """Send whatever is still buffered for stdout, and all later output, to the null device."""
    try:
        null = os.open(os.devnull, os.O_WRONLY)
        os.dup2(null, sys.stdout.fileno())
        os.close(null)
    except (OSError, ValueError):  # stdout is not a real file (e.g. captured in tests)
        pass


def output_problem(dest, what: str, inputs=()) -> str | None:
    """Why ``dest`` cannot receive ``what`` (a file to create or replace), or None when it can.

    Checked before the work starts: the folder exists and is writable, ``dest`` is not a folder,
    and it is none of the ``inputs`` (files that must never be written).
    """
    out = Path(dest)
    folder = out.parent if str(out.parent) else Path(".")
    if out.is_dir():
        why = "is a directory"
    elif not folder.is_dir():
        why = "folder does not exist"
    elif not os.access(folder, os.W_OK) or (out.exists() and not os.access(out, os.W_OK)):
        why = "is not writable"
    elif out.exists() and any(_same(out, p) for p in inputs):
        why = "is an input trace; pick another output"
    else:
        return None
    return f"{dest}: cannot write {what} ({why})"


def _same(a: Path, b) -> bool:
    try:
        return os.path.samefile(a, b)
    except OSError:
        return False


def emit_json(doc, dest: str, command: str, out: Stdout | None = None) -> bool:
    """Write ``doc`` as JSON to stdout when ``dest`` is '-', else atomically to the file ``dest``.

    Returns False (after one line on stderr) when the file cannot be written.
    """
    text = json.dumps(doc, indent=1, allow_nan=False) + "\n"
    if dest == "-":
        (out or Stdout()).write(text)
        return True
    try:
        write_atomic(dest, lambda fh: fh.write(text.encode("utf-8")))
    except OSError as exc:
        sys.stderr.write(f"resweep {command}: {dest}: cannot write JSON: {exc.strerror or exc}\n")
        return False
    return True
