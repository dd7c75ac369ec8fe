"""The dataset table is the one definition of the format: the reader, the writer and the format
reference (trace_format.md, written for people) must all agree with it."""
from __future__ import annotations

import h5py
import numpy as np

from paths import ROOT, SAMPLES
from resweep.core.format.datasets import TABLE, spec

REFERENCE = (ROOT / "core" / "format" / "trace_format.md").read_text()


def test_reference_documents_every_dataset_with_its_shape():
    for d in TABLE:
        assert f"`{d.name}`" in REFERENCE, d.path
        # The reference writes shapes like "(F, N, 3)"; symbols T+1 and B appear as written.
        assert d.shape_text() in REFERENCE, (d.path, d.shape_text())


def test_bundled_sample_follows_the_table():
    """Every dataset of a sample written by the writer has a table row, an accepted dtype and the
    table's rank; required datasets are all present."""
    with h5py.File(SAMPLES / "quarry.h5", "r") as f:
        found = []
        f.visititems(lambda name, obj: found.append("/" + name) if isinstance(obj, h5py.Dataset) else None)
        for path in found:
            d = spec(path)
            ds = f[path]
            assert len(ds.shape) == len(d.shape), path
            if d.dtypes == ("string",):
                assert h5py.check_string_dtype(ds.dtype) is not None
            elif d.dtypes[0] in ("integer", "float"):
                assert ds.dtype.kind == {"integer": "i", "float": "f"}[d.dtypes[0]], path
            else:
                assert str(ds.dtype) in d.dtypes, path
            if d.write_dtype not in (None,) and "|" not in d.write_dtype:
                assert ds.dtype == np.dtype(d.write_dtype), path
        assert {d.path for d in TABLE if d.required} <= set(found)
