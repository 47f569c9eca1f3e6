"""``python -m radledger.cli``: the same as the ``radledger`` command."""

import sys

from .main import main

sys.exit(main())
