"""``python -m resweep.app.cli``: the same as the ``resweep`` command."""
import sys

from resweep.app.cli.main import main

sys.exit(main())
