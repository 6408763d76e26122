"""``python -m meanband``: the same as the ``meanband`` console command."""

from __future__ import annotations

import sys

from meanband.cli import main

sys.exit(main())
