"""``python -m meanband`` runs the ``meanband`` console command."""

from __future__ import annotations

from meanband.cli import main

raise SystemExit(main())
