"""``python -m speccat``: the same as the ``speccat`` command."""

from __future__ import annotations

import sys

from speccat.cli import main

sys.exit(main())
