"""The divergence check: kinds (``kinds.py``, the one table), the row API that re-solves and
classifies rows (``rows.py`` over the ``nb_rows`` kernel), and the streaming whole-trace check
(``stream.py``). Importing this package loads no numba; ``rows`` and ``stream`` do."""
