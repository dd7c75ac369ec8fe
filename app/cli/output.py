"""Writing command output to stdout ('-') or a file, with one-line errors."""
from __future__ import annotations

import json
import sys


def emit_json(doc, dest: str, command: str) -> bool:
    """Write ``doc`` as JSON to stdout when ``dest`` is '-', else to the file ``dest``.

    Returns False (after one line on stderr) when the file cannot be written.
    """
    text = json.dumps(doc, indent=1, allow_nan=False) + "\n"
    if dest == "-":
        sys.stdout.write(text)
        return True
    try:
        with open(dest, "w", encoding="utf-8") as fh:
            fh.write(text)
    except OSError as exc:
        sys.stderr.write(f"resweep {command}: {dest}: cannot write JSON: {exc.strerror or exc}\n")
        return False
    return True
