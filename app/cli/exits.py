"""Exit statuses of the ``resweep`` command (documented in README's "Exit status" table)."""

EXIT_OK = 0            # no divergence of a failing kind; the command did its job
EXIT_DIVERGED = 1      # a divergence of a failing kind was found
EXIT_USAGE = 2         # wrong arguments, or an unreadable, invalid or refused input file
EXIT_INTERNAL = 3      # a bug in resweep (one line; RESWEEP_DEBUG=1 shows the traceback)
EXIT_INTERRUPTED = 130  # stopped by Ctrl-C (128 + SIGINT, common practice for shells)
