"""``python -m qwell.cli``: the same as the ``qwell`` command."""

import sys

from . import main

sys.exit(main())
