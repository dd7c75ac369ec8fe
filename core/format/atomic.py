"""Files created or replaced whole: a reader never sees a half-written output, and a failed
write leaves the old file as it was (temporary file in the same folder + rename, common practice)."""
from __future__ import annotations

import os
import tempfile
from pathlib import Path


def write_atomic(dest, write) -> None:
    """Create or replace ``dest`` whole: ``write(fh)`` fills a temporary file (binary) in the same
    folder, which is then renamed over ``dest``. OSError when the folder cannot be written; a
    failure leaves ``dest`` as it was and no temporary file behind."""
    dest = Path(dest)
    fd, tmp = tempfile.mkstemp(prefix=f".{dest.name}.", suffix=".part", dir=dest.parent if str(dest.parent) else ".")
    try:
        with os.fdopen(fd, "wb") as fh:
            write(fh)
        os.chmod(tmp, 0o666 & ~_umask())
        os.replace(tmp, dest)
    except BaseException:
        try:
            os.unlink(tmp)
        except OSError:
            pass
        raise


def _umask() -> int:
    mask = os.umask(0)
    os.umask(mask)
    return mask
