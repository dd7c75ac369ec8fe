"""The ``resweep`` command line: ``main`` parses and dispatches, one module per command
(``check``, ``info``, ``view``, ``snapshot``), exit statuses in ``exits``, output in ``output``.
A new command is one more module here plus its sub-parser in ``main``."""
from resweep.app.cli.main import main

__all__ = ["main"]
