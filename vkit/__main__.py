"""Run the vkit command line: ``python -m vkit``."""

from __future__ import annotations

import sys

from vkit.cli import main

__all__: list[str] = []

sys.exit(main())
