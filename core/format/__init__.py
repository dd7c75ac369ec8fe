"""Trace format v1 (``trace_format.md``): untrusted-HDF5 access (``h5safe``), the table of
datasets (``datasets``), the reader and the writer. New importers of other formats go here too."""
