"""Attributes of every kind h5py writes in its default file format, for tests that compare a
reader with h5py's own ``obj.attrs[key]``."""
from __future__ import annotations

import numpy as np

#: name -> value, one per kind: variable-length str, bytes, integers, float, array, list of str,
#: bool, fixed-length bytes.
PLAIN_ATTRIBUTES = {"s": "h\u00e9llo", "b": np.bytes_(b"raw"), "i": np.int64(3), "u8": np.uint8(200), "f": 1.5,
                    "arr": np.arange(4), "sl": ["a", "bc"], "bool": True,
                    "fixed": np.array(b"abc", dtype="S5")}


def write_plain_attributes(obj) -> None:
    """Set every attribute of :data:`PLAIN_ATTRIBUTES` on h5py object ``obj``."""
    for key, value in PLAIN_ATTRIBUTES.items():
        obj.attrs[key] = value
