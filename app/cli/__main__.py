"""``python -m app.cli``: the same as the ``wheelreach`` command."""

import sys

from app.cli.main import main

sys.exit(main())
