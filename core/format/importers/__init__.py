"""Importers of logs written by any engine (``log_format.md``, ``log_schema.json``) and the
matching exporter: streaming, bounded memory, errors naming the line and the field."""
