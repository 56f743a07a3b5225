"""``python -m app.cli``: the same as the ``degreescope`` command."""

import sys

from . import main

sys.exit(main())
